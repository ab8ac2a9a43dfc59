package editor

import (
	"sort"
	"strings"

	"stackfit/engine"
)

// quickSyntax describes the quick-entry line for the help screen. The
// activations come from the engine's own list, wrapped under their column,
// so a new one shows up here by itself.
func quickSyntax() string {
	const indent = "                          " // the column the examples start in
	acts := "act FUNCTION            "
	line := ""
	for i, a := range engine.ActKinds() {
		w := a.String()
		if a == engine.ActLeakyReLU {
			w += " 0.2"
		}
		if i < len(engine.ActKinds())-1 {
			w += ","
		}
		if line != "" && len(line)+1+len(w) > 54 {
			acts += line + "\n" + indent
			line = ""
		}
		if line != "" {
			line += " "
		}
		line += w
	}
	acts += line
	return `kind, then its main value, then options, separated by spaces:
  conv 64 k3 s2 p1        filters 64, kernel 3, stride 2, padding 1 (also: same, valid, d2 dilation, g4 groups, dw depthwise, nobias)
  deconv 32 k4 s2 p1 op1  transposed convolution with output padding 1
  pool max k3 s2 p1 ceil  max or avg pooling
  global-pool avg         pool-to 7      upsample 2 bilinear
  norm batch              norm group g32   norm instance affine   norm layer
  ` + acts + `
  dropout 0.3   flatten   dense 10 nobias   reshape 1024x4x4
  concat NAME crop  add NAME  block 2 residual  gate channel  fork copy|split
  conv x6 k1 round8 (x6, /4: of the input) · @NAME names it · sizes n or 3x5`
}

// completeKind returns the kind names that start with prefix, sorted.
func completeKind(prefix string) []string {
	var out []string
	for _, k := range engine.Kinds() {
		if n := k.String(); strings.HasPrefix(n, strings.ToLower(prefix)) {
			out = append(out, n)
		}
	}
	sort.Strings(out)
	return out
}

// newLayer returns a layer of kind k with the defaults the editor inserts,
// sized for an input with c channels: the kind's own example, with the
// widths taken from the input where that keeps the shape.
func newLayer(k engine.Kind, c int64) engine.Layer {
	c = max(c, 1)
	switch k {
	case engine.KindConv:
		return engine.Layer{Kind: k, Filters: c, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}}
	case engine.KindDeconv:
		return engine.Layer{Kind: k, Filters: max(c/2, 1), Kernel: engine.Square(4), Stride: engine.Square(2), Pad: engine.Padding{Size: engine.Square(1)}}
	case engine.KindPool:
		return engine.Layer{Kind: k, Pool: engine.PoolMax, Kernel: engine.Square(2)}
	case engine.KindGlobalPool:
		return engine.Layer{Kind: k, Pool: engine.PoolAvg}
	case engine.KindPoolTo:
		return engine.Layer{Kind: k, Size: engine.Square(7)}
	case engine.KindUpsample:
		return engine.Layer{Kind: k, Factor: engine.Square(2)}
	case engine.KindDropout:
		return engine.Layer{Kind: k, Rate: 0.2}
	case engine.KindDense:
		return engine.Layer{Kind: k, Filters: 10}
	case engine.KindReshape:
		return engine.Layer{Kind: k, Target: engine.Shape{C: c, H: 1, W: 1}}
	case engine.KindGate:
		// A squeeze-and-excitation gate (Hu et al. 2018): pool, squeeze to a
		// quarter of the channels (a multiple of 8, at least 8), expand back;
		// relative widths keep it right when the channels change.
		return engine.Layer{Kind: k, Body: []engine.Layer{
			{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg},
			{Kind: engine.KindConv, Rel: engine.Rel{Div: 4}, RoundTo: 8, Kernel: engine.Square(1)},
			{Kind: engine.KindAct, Act: engine.ActReLU},
			{Kind: engine.KindConv, Rel: engine.Rel{Mul: 1}, Kernel: engine.Square(1)},
			{Kind: engine.KindAct, Act: engine.ActSigmoid},
		}}
	case engine.KindFork:
		// Two branches, a 1×1 and a 3×3 convolution of half the channels
		// each, so the join keeps the width.
		half := engine.Rel{Div: 2}
		return engine.Layer{Kind: k, Body: []engine.Layer{
			{Kind: engine.KindBranch, Body: []engine.Layer{{Kind: engine.KindConv, Rel: half, Kernel: engine.Square(1)}}},
			{Kind: engine.KindBranch, Body: []engine.Layer{{Kind: engine.KindConv, Rel: half, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}}}},
		}}
	case engine.KindScale:
		return engine.Layer{Kind: k, ScaleInit: 1e-6} // layer scale's usual start (Liu et al. 2022)
	case engine.KindShuffle:
		return engine.Layer{Kind: k, Groups: 2}
	case engine.KindToSpace, engine.KindToChannels:
		return engine.Layer{Kind: k, PixelFactor: 2}
	case engine.KindKeep:
		return engine.Layer{Kind: k, Keep: max(c/2, 1)}
	case engine.KindSpatialGate:
		return engine.Layer{Kind: k, Kernel: engine.Square(7)} // the paper's 7×7 (Woo et al. 2018)
	case engine.KindBlock:
		return engine.Layer{Kind: k, Repeat: 1}
	}
	return engine.Layer{Kind: k} // norm batch, act relu, flatten, merges: the zero values
}
