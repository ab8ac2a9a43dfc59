package onnximport

import (
	"math"

	"stackfit/engine/onnximport/onnxpb"

	"stackfit/engine"
)

// activation maps the operators a residual block may apply after its
// addition to the stack's activations.
func activation(n *onnxpb.Node) (engine.ActKind, bool) {
	switch n.GetOpType() {
	case "Relu":
		return engine.ActReLU, true
	case "Sigmoid":
		return engine.ActSigmoid, true
	case "Tanh":
		return engine.ActTanh, true
	case "HardSwish":
		return engine.ActHardSwish, true
	case "Gelu":
		return engine.ActGELU, true
	case "Mish": // an ONNX operator from opset 18
		return engine.ActMish, true
	}
	return 0, false
}

// hardSigmoid reports whether a HardSigmoid node is PyTorch's
// (relu6(x + 3)/6: alpha 1/6, beta 1/2; ONNX's defaults are 0.2 and 0.5).
func hardSigmoid(n *onnxpb.Node) bool {
	a, bt := attr(n, "alpha"), attr(n, "beta")
	beta := float32(0.5)
	if bt != nil {
		beta = bt.GetF()
	}
	return a != nil && math.Abs(float64(a.GetF())-1.0/6) < 1e-6 && beta == 0.5
}

// count adds the elements of the named initializers to the graph's
// parameters, or with buffer to its buffers.
func (b *builder) count(buffer bool, names ...string) {
	for _, name := range names {
		d, ok := b.im.dims(name)
		if !ok || !b.im.initial[name] {
			continue
		}
		n := int64(1)
		for _, v := range d {
			n *= v
		}
		if buffer {
			b.buffers += n
		} else {
			b.params += n
		}
	}
}

// layer reads graph node k, which reads one computed tensor, as an item;
// nil for a node that only changes how the next layer reads the map
// (padding, a transpose to channels-last). It returns the tensor the
// flow continues with.
func (b *builder) layer(k int) (*item, string, error) {
	n := b.g.nodes[k]
	im := b.im
	stop := func(why string, args ...any) (*item, string, error) { return nil, "", b.stop(k, why, args...) }
	op := n.GetOpType()
	ins := n.GetInput()
	in := func(i int) string {
		if i < len(ins) {
			return ins[i]
		}
		return ""
	}
	next := n.GetOutput()[0]
	b.mark(k)
	nodes := []int{k}
	var l engine.Layer
	switch op {
	case "Conv", "ConvTranspose":
		w, ok := im.dims(in(1))
		if !ok || len(w) != 4 {
			return stop("its weight is not a constant of 4 dimensions")
		}
		kern, err := pair(n, "kernel_shape", w[2])
		if err != nil {
			return stop("%v", err)
		}
		st, err := pair(n, "strides", 1)
		if err != nil {
			return stop("%v", err)
		}
		d, err := pair(n, "dilations", 1)
		if err != nil {
			return stop("%v", err)
		}
		p, err := pads(n)
		if err != nil {
			return stop("%v", err)
		}
		groups := int64(1)
		if a := attr(n, "group"); a != nil {
			groups = a.GetI()
		}
		if groups < 1 || groups > 1<<31 {
			return stop("group %d", groups)
		}
		l = engine.Layer{Kind: engine.KindConv, Filters: w[0], Kernel: kern, Stride: st, Dilation: d, Pad: p, Groups: groups, NoBias: in(2) == ""}
		if op == "ConvTranspose" {
			l.Kind, l.Filters = engine.KindDeconv, w[1]*groups
			if a := attr(n, "output_padding"); a != nil {
				if v := a.GetInts(); len(v) == 2 {
					l.OutPad = engine.Pair{H: v[0], W: v[1]}
				}
			}
		}
		if !l.NoBias {
			b.convBias++
		}
		b.count(false, in(1), in(2))
	case "BatchNormalization":
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormBatch, Eps: pytorchEps} // ONNX's default epsilon
		if a := attr(n, "epsilon"); a != nil {
			l.Eps = f32(a.GetF())
		}
		b.sawNorm = true
		b.count(false, in(1), in(2))
		b.count(true, in(3), in(4))
		b.buffers++ // the step counter PyTorch keeps, which ONNX does not carry
	case "InstanceNormalization":
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormInstance, Affine: engine.Off, Eps: 1e-5}
		if a := attr(n, "epsilon"); a != nil {
			l.Eps = f32(a.GetF())
		}
		if im.initial[in(1)] {
			l.Affine = engine.On
			b.count(false, in(1), in(2))
		}
		b.sawNorm = true
	case "LayerNormalization":
		axis := int64(-1)
		if a := attr(n, "axis"); a != nil {
			axis = a.GetI()
		}
		if !b.chanLast || (axis != -1 && axis != 3) {
			return stop("only a layer norm over the channels of a channels-last map (N×H×W×C, axis −1) is read")
		}
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormLayer}
		b.affineNorm(n, &l, in(1), in(2))
	case "GroupNormalization":
		// A group norm the rewrites found (Reshape, instance norm,
		// Reshape back, Mul γ, Add β); γ and β per channel.
		g := attr(n, "num_groups").GetI()
		if g < 1 || g > 1<<31 {
			return stop("%d groups", g)
		}
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormGroup, NormGroups: g}
		b.affineNorm(n, &l, in(1), in(2))
	case "ChannelShuffle":
		// The channel shuffle the rewrites found.
		g := attr(n, "groups").GetI()
		if g < 1 || g > 1<<31 {
			return stop("%d groups", g)
		}
		l = engine.Layer{Kind: engine.KindShuffle, Groups: g}
	case "DepthToSpace", "SpaceToDepth", "PixelUnshuffle":
		// PixelUnshuffle: the one the rewrites found (not an ONNX
		// operator: PyTorch's order).
		r := attr(n, "blocksize").GetI()
		if r < 1 || r > engine.MaxFactor {
			return stop("blocksize %d", r)
		}
		l = engine.Layer{Kind: engine.KindToSpace, PixelFactor: r}
		if op != "DepthToSpace" {
			l.Kind = engine.KindToChannels
		}
		// PyTorch's order is CRD (channel c·r² + i·r + j); DepthToSpace's
		// default DCR and SpaceToDepth take the r² offsets first (channel
		// (i·r + j)·C + c): the same sizes and counts, another order.
		if mode := attr(n, "mode"); op == "SpaceToDepth" || op == "DepthToSpace" && (mode == nil || string(mode.GetS()) != "CRD") {
			b.im.note(op + " orders the channels offsets first (DCR); read as " + l.Kind.String() +
				", which orders them as PyTorch does (CRD): the sizes and counts agree, the exported module's channel order differs")
		}
	case "Slice":
		c, ok := b.keep(n)
		if !ok {
			return stop("only a slice of the first channels (axis 1, from 0, step 1, bounds given as constants) is read, as keep")
		}
		l = engine.Layer{Kind: engine.KindKeep, Keep: c}
	case "Relu", "Sigmoid", "Tanh", "HardSwish", "Gelu", "Mish":
		a, _ := activation(n)
		l = engine.Layer{Kind: engine.KindAct, Act: a}
	case "LeakyRelu":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActLeakyReLU, Slope: 0.01}
		if a := attr(n, "alpha"); a != nil {
			l.Slope = f32(a.GetF())
		}
	case "PRelu":
		c, w, ok := b.preluSlopes(n)
		if !ok {
			return stop("only a slope weight of one value or one per channel ([C, 1, 1] or [1] of an N×C×H×W map) is read, as prelu")
		}
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: c}
		b.count(false, w)
	case "Softmax":
		if !b.channelSoftmax(n) {
			return stop("only a softmax over the channels at each position is read (axis 1 of an N×C×H×W map, or the last axis of a channels-last one)")
		}
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}
	case "HardSigmoid":
		if !hardSigmoid(n) {
			return stop("only PyTorch's hard sigmoid (alpha 1/6, beta 1/2) is read")
		}
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActHardSigmoid}
	case "Clip":
		lo, hi := 0.0, 0.0
		okLo, okHi := false, false
		if len(ins) > 2 {
			lo, okLo = im.scalar(in(1))
			hi, okHi = im.scalar(in(2))
		} else if a, c := attr(n, "min"), attr(n, "max"); a != nil && c != nil {
			lo, hi, okLo, okHi = f32(a.GetF()), f32(c.GetF()), true, true
		}
		if !okLo || !okHi || lo != 0 || hi != 6 {
			return stop("only a clip to 0..6 (relu6) is read")
		}
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU6}
	case "MaxPool", "AveragePool":
		kern, err := pair(n, "kernel_shape", 1)
		if err != nil {
			return stop("%v", err)
		}
		st, err := pair(n, "strides", 1)
		if err != nil {
			return stop("%v", err)
		}
		p, err := pads(n)
		if err != nil {
			return stop("%v", err)
		}
		l = engine.Layer{Kind: engine.KindPool, Pool: engine.PoolMax, Kernel: kern, Stride: st, Pad: p}
		if op == "AveragePool" {
			l.Pool = engine.PoolAvg
		}
		if a := attr(n, "ceil_mode"); a != nil && a.GetI() == 1 {
			l.Ceil = true
		}
	case "GlobalAveragePool":
		l = engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg}
	case "GlobalMaxPool":
		l = engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolMax}
	case "ReduceMean":
		axes := attr(n, "axes").GetInts()
		if axes == nil && in(1) != "" {
			axes, _ = im.ints(in(1))
		}
		// keepdims 0 gives N×C, which the stack reads as N×C×1×1: the
		// flatten after the pool changes nothing.
		if len(axes) != 2 || !(axes[0] == 2 || axes[0] == -2) || !(axes[1] == 3 || axes[1] == -1) || b.chanLast {
			return stop("only a mean over the height and width (axes 2, 3) is read, as global average pooling")
		}
		l = engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg}
	case "Flatten":
		l = engine.Layer{Kind: engine.KindFlatten} // to N×features; the stack's flatten gives N×C·H·W×1×1
	case "Reshape":
		v, ok := im.intsOf(in(1))
		switch {
		case ok && len(v) == 2 && (v[1] == -1 || v[1] > 0):
			l = engine.Layer{Kind: engine.KindFlatten}
		case ok && len(v) == 4 && v[1] > 0 && v[2] > 0 && v[3] > 0:
			l = engine.Layer{Kind: engine.KindReshape, Target: engine.Shape{C: v[1], H: v[2], W: v[3]}}
		default:
			return stop("its target shape %v is not N×features or N×C×H×W with fixed sizes", v)
		}
	case "Gemm":
		w, ok := im.dims(in(1))
		if !ok || len(w) != 2 {
			return stop("its weight is not a constant matrix")
		}
		if a := attr(n, "transA"); a != nil && a.GetI() != 0 {
			return stop("a transposed input (transA) is not a dense layer")
		}
		units := w[1]
		if a := attr(n, "transB"); a != nil && a.GetI() == 1 {
			units = w[0]
		}
		l = engine.Layer{Kind: engine.KindDense, Filters: units, NoBias: in(2) == ""}
		b.count(false, in(1), in(2))
	case "MatMul":
		w, ok := im.dims(in(1))
		if !ok || len(w) != 2 || !im.initial[in(1)] {
			return stop("it multiplies by something other than a weight matrix")
		}
		l = engine.Layer{Kind: engine.KindDense, Filters: w[1], NoBias: true, PerPosition: b.chanLast}
		b.count(false, in(1))
		// A linear layer on a map (channels last) is a MatMul and an Add
		// of its bias.
		if a := b.single(next); a >= 0 && b.g.nodes[a].GetOpType() == "Add" && len(b.g.data[a]) == 1 && !b.visited[a] {
			an := b.g.nodes[a]
			bias := an.GetInput()[0]
			if bias == next {
				bias = an.GetInput()[1]
			}
			if d, ok := im.dims(bias); ok && len(d) == 1 && d[0] == w[1] && im.initial[bias] {
				l.NoBias = false
				b.count(false, bias)
				b.mark(a)
				nodes = append(nodes, a)
				next = an.GetOutput()[0]
			}
		}
	case "Dropout":
		l = engine.Layer{Kind: engine.KindDropout, Rate: 0.5}
		if a := attr(n, "ratio"); a != nil {
			l.Rate = f32(a.GetF())
		} else if r, ok := im.scalar(in(1)); ok {
			l.Rate = r
		}
	case "Pad":
		var p []int64
		if a := attr(n, "pads"); a != nil {
			p = a.GetInts()
		} else {
			p, _ = im.ints(in(1))
		}
		if mode := attr(n, "mode"); mode != nil && string(mode.GetS()) != "constant" {
			return stop("only zero padding is read")
		}
		if len(p) != 8 || p[0] != 0 || p[1] != 0 || p[4] != 0 || p[5] != 0 || p[2] != p[6] || p[3] != p[7] || p[2] < 0 || p[3] < 0 || p[2] > engine.MaxSpatial || p[3] > engine.MaxSpatial {
			return stop("pads %v: only the same zero padding on both sides of the height and width is read", p)
		}
		b.pad = engine.Pair{H: b.pad.H + p[2], W: b.pad.W + p[3]}
		return nil, next, nil
	case "Transpose":
		perm := attr(n, "perm").GetInts()
		switch {
		case !b.chanLast && len(perm) == 4 && perm[0] == 0 && perm[1] == 2 && perm[2] == 3 && perm[3] == 1:
			b.chanLast = true
		case b.chanLast && len(perm) == 4 && perm[0] == 0 && perm[1] == 3 && perm[2] == 1 && perm[3] == 2:
			b.chanLast = false
		default:
			return stop("perm %v: only the transposes to channels-last and back (a layer norm or linear layer over the channels) are read", perm)
		}
		return nil, next, nil
	case "Mul":
		c := in(0)
		if c == b.g.data[k][0] {
			c = in(1)
		}
		d, ok := im.dims(c)
		if !ok || !im.initial[c] || !(len(d) == 3 && d[1] == 1 && d[2] == 1 || len(d) == 1 && b.chanLast) {
			return stop("it multiplies by a constant that is not a learnable factor per channel (C×1×1)")
		}
		l = engine.Layer{Kind: engine.KindScale}
		b.count(false, c)
	case "Resize", "Upsample":
		s, ok := im.floats(in(len(ins) - 1))
		if op == "Resize" {
			s, ok = im.floats(in(2))
		}
		mode := "nearest"
		if a := attr(n, "mode"); a != nil {
			mode = string(a.GetS())
		}
		if !ok || len(s) != 4 || s[0] != 1 || s[1] != 1 || s[2] < 1 || s[3] < 1 || s[2] != math.Trunc(s[2]) || s[3] != math.Trunc(s[3]) || s[2] > engine.MaxSpatial || s[3] > engine.MaxSpatial {
			return stop("only an upsampling by whole scale factors given as constants is read (scales %v)", s)
		}
		l = engine.Layer{Kind: engine.KindUpsample, Factor: engine.Pair{H: int64(s[2]), W: int64(s[3])}}
		switch mode {
		case "nearest":
		case "linear", "bilinear":
			l.Upsample = engine.UpBilinear
		default:
			return stop("mode %q: nearest and bilinear upsampling are read", mode)
		}
	default:
		return stop("the operator is not imported yet")
	}
	if b.pad != (engine.Pair{}) {
		if (l.Kind == engine.KindConv || l.Kind == engine.KindPool) && l.Pad.Mode == engine.PadExplicit {
			l.Pad.Size.H += b.pad.H
			l.Pad.Size.W += b.pad.W
			b.pad = engine.Pair{}
		} else {
			return stop("a Pad node before it: padding is read only before a convolution or pooling")
		}
	}
	return &item{l: l.Normalized(), nodes: nodes}, next, nil
}

// affineNorm reads what a layer or group norm node shares: its eps
// (1e-5, PyTorch's default, when absent), whether it has a scale and
// shift (gamma, beta: weights of the graph, or none), and counts them.
func (b *builder) affineNorm(n *onnxpb.Node, l *engine.Layer, gamma, beta string) {
	l.Eps = 1e-5
	if a := attr(n, "epsilon"); a != nil {
		l.Eps = f32(a.GetF())
	}
	if !b.im.initial[gamma] {
		l.Affine = engine.Off
	}
	b.count(false, gamma, beta)
	b.sawNorm = true
}

// channelSoftmax reports whether a Softmax node is one over the channels
// at each position: axis 1 of an N×C×H×W map (from opset 13 the axis
// alone; before it, Softmax flattens every axis from its own on, so only
// where the map is 1×1), or the last axis of a map made channels-last by
// a Transpose (what an exporter writes before opset 13).
func (b *builder) channelSoftmax(n *onnxpb.Node) bool {
	axis := int64(-1) // ONNX's default from opset 13
	if b.im.opset < 13 {
		axis = 1
	}
	if a := attr(n, "axis"); a != nil {
		axis = a.GetI()
	}
	ins := n.GetInput()
	if len(ins) != 1 {
		return false
	}
	xs := b.g.shapes[ins[0]]
	a, ok := axisOf(axis, int64(len(xs)))
	if !ok || len(xs) != 4 {
		return false
	}
	if b.chanLast {
		return a == 3
	}
	return a == 1 && (b.im.opset >= 13 || xs[2]*xs[3] == 1)
}

// preluSlopes reads a PRelu node's slope: an initializer of one value
// (shared: [1], [1, 1, 1] or a scalar) or of one per channel of its
// N×C×H×W input ([C, 1, 1], PyTorch's nn.PReLU(C) as torch.onnx 1.13
// writes it at opsets 13 and 17; [C] on a channels-last map, broadcast
// along its last axis); perChannel says which. A one-channel map's single
// slope reads as shared: the counts agree. The slope is a weight or,
// exported without constant folding, an Unsqueeze of one (weight [C],
// axes 1 and 2); weight names the one to count.
func (b *builder) preluSlopes(n *onnxpb.Node) (perChannel bool, weight string, ok bool) {
	ins := n.GetInput()
	if len(ins) != 2 {
		return false, "", false
	}
	weight = ins[1]
	d, known := b.im.dims(weight)
	if v, seen := b.im.unsqueezed[weight]; seen {
		weight, d, known = v.weight, v.dims, true
	}
	xs := b.g.shapes[ins[0]]
	if !known || !b.im.initial[weight] || len(xs) != 4 || len(d) > 3 {
		return false, "", false
	}
	count := int64(1)
	for _, v := range d {
		count *= v
	}
	switch {
	case count == 1:
		return false, weight, true
	case b.chanLast:
		return true, weight, len(d) == 1 && d[0] == xs[3]
	}
	return true, weight, len(d) == 3 && d[0] == xs[1] && d[1] == 1 && d[2] == 1
}

// keep reads a Slice node as the first channels of its input: one axis,
// the channels (1, or −3 of a 4-D map), from 0 with step 1, its bounds
// constants or initializers; the end is clamped to the channels, as
// ONNX's Slice clamps it.
func (b *builder) keep(n *onnxpb.Node) (int64, bool) {
	ins := n.GetInput()
	if len(ins) < 3 || len(ins) > 5 {
		return 0, false
	}
	xs := b.g.shapes[ins[0]]
	st, ok1 := b.im.intsOf(ins[1])
	en, ok2 := b.im.intsOf(ins[2])
	if !ok1 || !ok2 || len(st) != 1 || len(en) != 1 || len(xs) != 4 {
		return 0, false
	}
	axis := int64(0)
	if len(ins) > 3 && ins[3] != "" {
		ax, ok := b.im.intsOf(ins[3])
		if !ok || len(ax) != 1 {
			return 0, false
		}
		axis = ax[0]
	}
	if a, ok := axisOf(axis, 4); !ok || a != 1 {
		return 0, false
	}
	if len(ins) > 4 && ins[4] != "" {
		if sp, ok := b.im.intsOf(ins[4]); !ok || len(sp) != 1 || sp[0] != 1 {
			return 0, false
		}
	}
	lo, hi := clampIndex(st[0], xs[1]), clampIndex(en[0], xs[1])
	if lo != 0 || hi < 1 {
		return 0, false
	}
	return hi, true
}
