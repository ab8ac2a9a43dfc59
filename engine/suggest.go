package engine

import "strings"

// aliases are names practitioners type for things stackfit spells
// otherwise: framework and paper spellings of kinds, activations and
// norms. Suggest offers the stackfit word for them; they are never
// accepted in place of it, so every value keeps one spelling.
var aliases = map[string]string{
	"lrelu":           "leaky-relu", // PyTorch's nn.LeakyReLU, often shortened
	"leakyrelu":       "leaky-relu",
	"swish":           "silu", // Ramachandran et al. 2017 name x·sigmoid(x) swish
	"hswish":          "hard-swish",
	"hsigmoid":        "hard-sigmoid",
	"parametric-relu": "prelu",   // He et al. 2015's parametric rectified linear unit
	"softmax2d":       "softmax", // PyTorch's nn.Softmax2d: the softmax over the channels
	"bn":              "batch",   // norm batch
	"batchnorm":       "batch",
	"gn":              "group",
	"groupnorm":       "group",
	"fc":              "dense", // "fully connected"
	"linear":          "dense", // PyTorch's nn.Linear
	"maxpool":         "pool",
	"avgpool":         "pool",
	"convtranspose":   "deconv", // PyTorch's nn.ConvTranspose2d
	"cat":             "concat",
	"pixelshuffle":    "to-space", // PyTorch's nn.PixelShuffle
	"pixel-shuffle":   "to-space",
	"depthtospace":    "to-space", // ONNX's DepthToSpace
	"depth-to-space":  "to-space",
	"pixelunshuffle":  "to-channels", // PyTorch's nn.PixelUnshuffle
	"pixel-unshuffle": "to-channels",
	"spacetodepth":    "to-channels", // ONNX's SpaceToDepth
	"space-to-depth":  "to-channels",
	"slice":           "keep", // a slice of the first channels
	"narrow":          "keep", // torch.narrow
}

// Suggest returns the candidate that s is most likely a slip for, or "":
// the stackfit word for a known alias (lrelu → leaky-relu) when that word is
// a candidate, else the candidate closest by edit distance when it is
// close enough to be a likely typo (one edit per four letters, at least
// one). Case does not matter. It is the one suggester every "did you
// mean" uses: the stack file, quick entry, the command line and the keys
// file.
func Suggest(s string, candidates []string) string {
	low := strings.ToLower(s)
	if a, ok := aliases[low]; ok {
		for _, c := range candidates {
			if c == a {
				return c
			}
		}
	}
	best, bestD := "", 2+len(s)/4
	for _, c := range candidates {
		if d := editDistance(low, c); d < bestD {
			best, bestD = c, d
		}
	}
	return best
}

// editDistance is the optimal-string-alignment distance between a and b:
// insertions, deletions, substitutions and swaps of neighbours cost one.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	if len(ra) > 64 { // no kind, key or command is that long
		return len(ra)
	}
	d := make([][]int, len(ra)+1)
	for i := range d {
		d[i] = make([]int, len(rb)+1)
		d[i][0] = i
	}
	for j := range d[0] {
		d[0][j] = j
	}
	for i := 1; i <= len(ra); i++ {
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			d[i][j] = min(d[i-1][j]+1, d[i][j-1]+1, d[i-1][j-1]+cost)
			if i > 1 && j > 1 && ra[i-1] == rb[j-2] && ra[i-2] == rb[j-1] {
				d[i][j] = min(d[i][j], d[i-2][j-2]+1)
			}
		}
	}
	return d[len(ra)][len(rb)]
}
