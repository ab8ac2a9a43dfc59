package engine

import "fmt"

// toSpaceSpec is the sub-pixel rearrangement of Shi et al. 2016 ("Real-Time
// Single Image and Video Super-Resolution Using an Efficient Sub-Pixel
// Convolutional Neural Network", the periodic shuffling PS): C·r² channels
// at H×W become C channels at rH×rW, output channel c at (r·y + i, r·x + j)
// being input channel c·r² + i·r + j at (y, x), as PyTorch's
// nn.PixelShuffle orders them.
var toSpaceSpec = Spec{
	Kind: KindToSpace, Key: "to-space", Help: "move channels into space: C·r² channels at H×W → C at rH×rW (pixel shuffle)",
	Example: "to-space 2",
	Main:    &factorParam,
	eval: func(c *calc, f *flow) {
		in, r := c.row.In, c.l.PixelFactor
		if !c.atLeast("factor", r, 1) {
			return
		}
		rr := mul(&c.ov, r, r)
		h, w := mul(&c.ov, in.H, r), mul(&c.ov, in.W, r)
		if !c.checkOverflow("output size") {
			return
		}
		if in.C%rr != 0 {
			c.fail(Diagnostic{Code: ErrToSpaceChannels, Field: "factor", A: in.C, B: rr, C: r, D: nextMultiple(in.C, rr)})
			return
		}
		c.row.Out = Shape{in.C / rr, h, w}
		// Each output position reads one input position: the receptive
		// field stays, and neighbours are 1/r of an input step apart.
		f.jump.H /= float64(r)
		f.jump.W /= float64(r)
	},
	explain: func(row *Row) []string {
		in, r := row.In, row.Layer.PixelFactor
		return []string{
			fmt.Sprintf("%d channels = %d × %d² → out %d×%d×%d (%d·%d × %d·%d)", in.C, row.Out.C, r, row.Out.C, row.Out.H, row.Out.W, in.H, r, in.W, r),
			fmt.Sprintf("output channel c at (%d·y + i, %d·x + j) ← input channel %d·c + %d·i + j at (y, x); 0 params, 0 MACs", r, r, r*r, r),
		}
	},
	// A reshape, a permute and a copy: autograd keeps nothing
	// (saved_tensors_hooks on PyTorch 1.13's nn.PixelShuffle), and a
	// channels-last input gives a channels-last output.
	keepLayout: true,
	work:       copyWork,
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("nn.PixelShuffle(%d)", row.Layer.PixelFactor)}
	},
}

// toChannelsSpec is the inverse rearrangement (PyTorch's
// nn.PixelUnshuffle): C channels at H×W become C·r² at H/r×W/r, each r×r
// block of a channel spread over r² channels.
var toChannelsSpec = Spec{
	Kind: KindToChannels, Key: "to-channels", Help: "move space into channels: C at H×W → C·r² at H/r×W/r (pixel unshuffle)",
	Example: "to-channels 2",
	Main:    &factorParam,
	eval: func(c *calc, f *flow) {
		in, r := c.row.In, c.l.PixelFactor
		if !c.atLeast("factor", r, 1) {
			return
		}
		// One error, for the height when it is off (both axes when both
		// are, and by the same number), else for the width.
		if in.H%r != 0 || in.W%r != 0 {
			d := Diagnostic{Code: ErrToChannelsSize, Field: "factor", Axis: 'h', A: in.H, B: r}
			switch {
			case in.H%r != 0 && in.W == in.H:
				d.Axis = 'b'
			case in.H%r == 0:
				d.Axis, d.A = 'w', in.W
			}
			d.C = nextMultiple(d.A, r)
			c.fail(d)
			return
		}
		ch := mul(&c.ov, in.C, mul(&c.ov, r, r))
		if !c.checkOverflow("channels") {
			return
		}
		if ch > MaxChannels {
			c.fail(Diagnostic{Code: ErrOverflow, Field: "channels"})
			return
		}
		c.row.Out = Shape{ch, in.H / r, in.W / r}
		// An r×r window with stride r, as a pooling of that window.
		f.rf.H += float64(r-1) * f.jump.H
		f.rf.W += float64(r-1) * f.jump.W
		f.jump.H *= float64(r)
		f.jump.W *= float64(r)
	},
	explain: func(row *Row) []string {
		in, r := row.In, row.Layer.PixelFactor
		return []string{
			fmt.Sprintf("out %d×%d×%d = %d·%d² channels at %d/%d × %d/%d", row.Out.C, row.Out.H, row.Out.W, in.C, r, in.H, r, in.W, r),
			fmt.Sprintf("output channel %d·c + %d·i + j at (y, x) ← input channel c at (%d·y + i, %d·x + j); 0 params, 0 MACs", r*r, r, r, r),
		}
	},
	// As to-space: autograd keeps nothing (saved_tensors_hooks on
	// PyTorch 1.13's nn.PixelUnshuffle), the layout is kept.
	keepLayout: true,
	work:       copyWork,
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("nn.PixelUnshuffle(%d)", row.Layer.PixelFactor)}
	},
}

// factorParam is the block side r of to-space and to-channels.
var factorParam = Param{Key: "factor", Help: "block side r, e.g. 2 (r² channels per output pixel)", Type: TInt, Lo: 1, Hi: MaxFactor,
	Label: "factor", Need: "a factor",
	get: func(l *Layer) Value { return Value{Int: l.PixelFactor} },
	set: func(l *Layer, v Value) { l.PixelFactor = v.Int }}

// copyWork is the rule of a rearrangement that computes nothing: forward
// reads the input and writes the output, backward reads the output's
// gradient and writes the input's (when one is needed).
func copyWork(row *Row) Work {
	in, out := float64(elems(row.In)), float64(elems(row.Out))
	w := Work{Class: ClassMemory, FwdRead: in, FwdWrite: out}
	if row.Grad {
		w.BwdRead, w.BwdWrite = out, in
	}
	return w
}

// nextMultiple is the least multiple of m above n (m ≥ 1, n ≥ 0), for the
// fix an error offers; n itself where that would overflow.
func nextMultiple(n, m int64) int64 {
	var ov bool
	v := add(&ov, n-n%m, m)
	if ov {
		return n
	}
	return v
}
