package engine

// Kind identifies what a layer does.
type Kind uint8

// Layer kinds. The names returned by String are the keys used in stack files.
const (
	KindInvalid     Kind = iota
	KindConv             // 2-D convolution
	KindDeconv           // 2-D transposed convolution
	KindPool             // max or average pooling with a fixed window
	KindGlobalPool       // pooling over the whole map to 1×1
	KindPoolTo           // average pooling to a fixed output size (adaptive)
	KindUpsample         // upsampling by an integer factor
	KindNorm             // batch, group, instance or layer normalisation
	KindAct              // element-wise activation
	KindDropout          // dropout
	KindFlatten          // C×H×W → C·H·W×1×1
	KindDense            // fully connected layer
	KindReshape          // reinterpret the elements as a new C×H×W
	KindBlock            // a group of layers, repeated, optionally residual
	KindConcat           // channel-wise concatenation with a named earlier output
	KindAdd              // element-wise sum with a named earlier output
	KindGate             // the map scaled per channel by a gate its body computes from it
	KindScale            // a learnable factor per channel (layer scale)
	KindShuffle          // channel shuffle across groups
	KindFork             // parallel branches from one map, joined along the channels or added
	KindBranch           // one branch of a fork: a list of layers (empty: the map itself)
	KindToSpace          // channels moved into space: C·r²×H×W → C×rH×rW (pixel shuffle)
	KindToChannels       // space moved into channels: C×H×W → C·r²×H/r×W/r (pixel unshuffle)
	KindKeep             // the first N channels kept, the rest dropped
	KindSpatialGate      // the map scaled per position by a gate from its channels' mean and max
	kindCount
)

// String returns the kind's stack-file key.
func (k Kind) String() string { return SpecOf(k).Key }

// Kinds lists every layer kind a stack may hold, in display order.
func Kinds() []Kind {
	out := make([]Kind, 0, kindCount-1)
	for k := KindConv; k < kindCount; k++ {
		out = append(out, k)
	}
	return out
}

// KindByName returns the kind whose stack-file key is name.
func KindByName(name string) (Kind, bool) {
	for k := KindConv; k < kindCount; k++ {
		if specs[k] != nil && specs[k].Key == name {
			return k, true
		}
	}
	return KindInvalid, false
}

// PadMode says how the padding of a convolution is chosen.
type PadMode uint8

// Padding modes.
const (
	PadExplicit PadMode = iota // Pad.H rows and Pad.W columns on each side
	PadSame                    // output = ⌈input/stride⌉; extra row/column at bottom/right when odd
	PadValid                   // no padding
)

// Padding is a convolution or pooling padding.
type Padding struct {
	Mode PadMode
	Size Pair // per side, for PadExplicit
}

// PoolMode says how a pooling window is reduced.
type PoolMode uint8

// Pooling modes.
const (
	PoolMax PoolMode = iota
	PoolAvg
)

// String returns the stack-file value.
func (m PoolMode) String() string {
	if m == PoolAvg {
		return "avg"
	}
	return "max"
}

// UpsampleMode is the interpolation of an upsampling layer.
type UpsampleMode uint8

// Upsampling modes.
const (
	UpNearest UpsampleMode = iota
	UpBilinear
)

// String returns the stack-file value.
func (m UpsampleMode) String() string {
	if m == UpBilinear {
		return "bilinear"
	}
	return "nearest"
}

// NormKind is the flavour of a normalisation layer.
type NormKind uint8

// Normalisation flavours.
const (
	NormBatch    NormKind = iota // per channel over batch and positions; running statistics as buffers
	NormGroup                    // per group of channels over positions
	NormInstance                 // per channel over positions
	NormLayer                    // over channels at each position (the convolutional layer norm)
)

var normNames = [...]string{"batch", "group", "instance", "layer"}

// String returns the stack-file value.
func (n NormKind) String() string {
	if int(n) < len(normNames) {
		return normNames[n]
	}
	return "invalid"
}

// Toggle is an optional boolean: unset means the kind's default.
type Toggle uint8

// Toggle values.
const (
	Unset Toggle = iota
	On
	Off
)

// Or resolves the toggle against a default.
func (t Toggle) Or(def bool) bool {
	switch t {
	case On:
		return true
	case Off:
		return false
	}
	return def
}

// Layer is one item of a stack. Which fields matter depends on Kind; the
// zero value of every optional field means "the kind's default" (stride 1,
// dilation 1, one group, bias on, pooling stride equal to its window, ...).
// The fields a convolution reads come first, so that evaluating one touches
// as few cache lines as possible.
type Layer struct {
	Kind Kind

	// conv, deconv: output channels. dense: output units.
	Filters int64
	// conv, deconv, pool: window size.
	Kernel Pair
	// conv, deconv, pool: step; zero means 1 (pool: the kernel).
	Stride Pair
	// conv, deconv, pool: padding.
	Pad Padding
	// conv, deconv: spacing between kernel taps; zero means 1.
	Dilation Pair
	// conv, deconv: number of channel groups; zero means 1.
	Groups int64
	// conv, deconv: one group per input channel (groups = input channels).
	Depthwise bool
	// conv, deconv, dense: a width relative to an enclosing input instead
	// of Filters (the zero Rel means Filters is the width).
	Rel Rel
	// conv, deconv, dense: no additive bias.
	NoBias bool
	// conv, deconv, dense: the layer writes bias: yes itself, so a stack's
	// defaults cannot take its bias away (never set with NoBias).
	BiasOn bool
	// conv, deconv: groups from a channels-per-group figure (group width,
	// Radosavovic et al. 2020): groups = input channels / GroupWidth;
	// zero: Groups (or Depthwise) decides.
	GroupWidth int64
	// deconv: extra rows/columns added at the bottom/right of the output.
	OutPad Pair

	// pool, global-pool: max or average.
	Pool PoolMode
	// pool: round the output size up instead of down.
	Ceil bool
	// pool-to: output height and width.
	Size Pair
	// upsample: integer scale factor per axis.
	Factor Pair
	// upsample: interpolation.
	Upsample UpsampleMode
	// norm: flavour, number of groups (group norm) and learnable scale/shift.
	Norm       NormKind
	NormGroups int64
	Affine     Toggle
	// norm: the ε added to the variance; zero means unwritten: the stack's
	// default for norms, else PyTorch's 1e-5.
	Eps float64
	// dense: apply at every position of a map (over its channels), as a
	// 1×1 convolution does, instead of needing a 1×1 map.
	PerPosition bool
	// act: function and negative slope (leaky-relu; zero means 0.01), or
	// the value prelu's learned slopes start at (zero means 0.25).
	Act   ActKind
	Slope float64
	// act: prelu learns one slope per channel instead of one shared.
	PerChannel bool
	// dropout: probability of zeroing an element.
	Rate float64
	// reshape: target shape.
	Target Shape

	// block: the layers of one repeat, written as the first repeat.
	Body []Layer
	// block: number of repeats; zero means 1.
	Repeat int64
	// block: strides of the body apply to every repeat, not just the first.
	AllStrides bool
	// block: add the block's input to the output of each repeat.
	Residual bool
	// block: leave out the batch norm after a projection shortcut.
	NoShortcutNorm bool
	// block: activation applied after the residual addition, if HasPostAct.
	PostAct    ActKind
	HasPostAct bool
	// block: add the input only where the shapes match, never through a
	// projection (inverted residuals).
	IdentityOnly bool
	// block: stochastic depth, the probability of dropping a sample's
	// residual branch while training (Huang et al. 2016).
	DropPath float64
	// block: each repeat's output is concatenated to its input along the
	// channels (dense connectivity, Huang et al. 2017).
	DenseLinks bool

	// fork: each branch reads an equal share of the channels instead of
	// the whole map (channel split).
	Split bool
	// fork: the branches' outputs are added instead of concatenated
	// (their shapes must then be equal).
	JoinAdd bool

	// concat, add: name of the earlier layer or block whose output is
	// merged. branch: the named earlier output the branch starts from
	// instead of the fork's input ("": the fork's input).
	From string
	// concat, add: center-crop the larger map to the smaller one's size.
	Crop bool
	// concat: the named map's channels come first (torch.cat([skip, x]),
	// as a U-Net's decoder joins its encoder's map).
	First bool

	// conv, deconv, dense: a relative width reads the input of the
	// innermost enclosing block repeat, not of the innermost body (gate,
	// branch or repeat).
	RelBlock bool
	// conv, deconv, dense: a relative width reads the layer's own input
	// (its row's input channels), not an enclosing body's.
	RelInput bool
	// conv, deconv, dense: round a relative width to a multiple of this,
	// never below it nor below 90% of the exact value; zero: no rounding.
	RoundTo int64

	// scale: the value every per-channel factor starts at (the stack file's
	// value; 1 when it is left out).
	ScaleInit float64

	// to-space, to-channels: the block side r.
	PixelFactor int64
	// keep: how many channels, from the first, pass on.
	Keep int64
	// spatial-gate: a batch norm between the gate's convolution and its
	// sigmoid (Kernel holds the convolution's window, NoBias its bias).
	GateNorm bool

	Name string // optional short identifier
	Note string // optional free text

	// A use of a unit (a block whose body is the unit's expansion, see
	// ExpandUnits): the unit's name and the use's arguments.
	Unit string
	Args []Arg
	// In a unit's body: the fields bound to the unit's parameters.
	Binds []Bind
}

// stride returns the effective stride.
func (l *Layer) stride() Pair {
	if l.Kind == KindPool {
		return fill(l.Stride, l.Kernel)
	}
	return fill(l.Stride, Square(1))
}

// dilation returns the effective dilation.
func (l *Layer) dilation() Pair { return fill(l.Dilation, Square(1)) }

// fill replaces each zero value of p with the matching value of d.
func fill(p, d Pair) Pair {
	if p.H == 0 {
		p.H = d.H
	}
	if p.W == 0 {
		p.W = d.W
	}
	return p
}

// EffectiveStride returns the layer's stride with defaults applied.
func (l *Layer) EffectiveStride() Pair { return l.stride() }

// EffectiveDilation returns the layer's dilation with defaults applied.
func (l *Layer) EffectiveDilation() Pair { return l.dilation() }

// IsMerge reports whether the kind combines the flow with a named output.
func (k Kind) IsMerge() bool { return SpecOf(k).Merge }

// HasWeights reports whether the kind carries a weight matrix whose width
// the user chooses (conv, deconv, dense).
func (k Kind) HasWeights() bool { return SpecOf(k).Weighted }

// Normalized returns the layer with every field that equals its kind's
// default reset to the zero value, so that two layers that compute the same
// thing compare equal (the stack file's canonical form relies on this).
// Fields a stack's defaults may set (Param.FileDefault) are kept as
// written: a written value, even one equal to the kind's default, holds
// whatever the defaults say.
func (l Layer) Normalized() Layer {
	if l.Kind == KindPool && l.Stride == l.Kernel || l.Kind != KindPool && l.Stride == Square(1) {
		l.Stride = Pair{}
	}
	if l.Dilation == Square(1) {
		l.Dilation = Pair{}
	}
	if l.Groups == 1 {
		l.Groups = 0
	}
	if l.Affine == On && l.Norm != NormInstance || l.Affine == Off && l.Norm == NormInstance {
		l.Affine = Unset
	}
	if l.Pad.Mode != PadExplicit {
		l.Pad.Size = Pair{}
	}
	if l.NoBias {
		l.BiasOn = false
	}
	if l.Depthwise || l.Groups > 1 {
		l.GroupWidth = 0
	}
	if l.Kind == KindBlock && l.Repeat < 1 {
		l.Repeat = 1
	}
	return l
}

// ResolvedPadding returns the padding a convolution or pooling layer applies
// to an input of size in: before (top, left) and after (bottom, right).
// "same" pads (o − 1)·s + d(k − 1) + 1 − i in total, the odd one after.
func (l *Layer) ResolvedPadding(in Shape) (before, after Pair) {
	switch l.Pad.Mode {
	case PadValid:
		return Pair{}, Pair{}
	case PadExplicit:
		return l.Pad.Size, l.Pad.Size
	}
	s, d := l.stride(), l.dilation()
	axis := func(i, k, s, d int64) (int64, int64) {
		if s < 1 || k < 1 || d < 1 {
			return 0, 0
		}
		out := (i-1)/s + 1 // ⌈i/s⌉ without overflow
		total := max((out-1)*s+d*(k-1)+1-i, 0)
		return total / 2, total - total/2
	}
	before.H, after.H = axis(in.H, l.Kernel.H, s.H, d.H)
	before.W, after.W = axis(in.W, l.Kernel.W, s.W, d.W)
	return before, after
}
