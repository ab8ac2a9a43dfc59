package engine

import "fmt"

// poolModeParam is the main value of both poolings: max or avg.
func poolModeParam(optional bool) *Param {
	return &Param{Key: "mode", Help: "max or avg", Type: TChoice, Choices: []string{"max", "avg"},
		Need: "max or avg", Optional: optional, Default: Value{Int: int64(PoolAvg)},
		get: func(l *Layer) Value { return Value{Int: int64(l.Pool)} },
		set: func(l *Layer, v Value) { l.Pool = PoolMode(v.Int) }}
}

var poolSpec = Spec{
	Kind: KindPool, Key: "pool", Help: "max or average over a window", Example: "pool max k3 s2 p1",
	Main: poolModeParam(false),
	Params: []Param{kernelParam, strideParam,
		{Key: "pad", Help: "n or h×w", Type: TPad, Lo: 0, Hi: MaxWindow, Quick: "p", Words: []string{"same", "valid"},
			get: func(l *Layer) Value { return Value{Pad: l.Pad} },
			set: func(l *Layer, v Value) { l.Pad = v.Pad }},
		{Key: "ceil", Help: "yes or no", Type: TBool, Words: []string{"", "ceil"},
			get: func(l *Layer) Value { return Value{Bool: l.Ceil} },
			set: func(l *Layer, v Value) { l.Ceil = v.Bool }}},
	eval: func(c *calc, f *flow) { c.pool(f) },
	work: func(row *Row) Work { return poolWork(row, float64(row.Layer.Kernel.H*row.Layer.Kernel.W)) },
	explain: func(row *Row) []string {
		return axisLines(row.Layer, row.In, row.Out, rowStride(row), Square(1))
	},
	saved: savedPool,
	torch: func(row *Row) Torch {
		l := row.Layer
		kind := "MaxPool2d"
		if l.Pool == PoolAvg {
			kind = "AvgPool2d"
		}
		return Torch{Module: fmt.Sprintf("nn.%s(%s, stride=%s, padding=%s, ceil_mode=%s)",
			kind, tuple(l.Kernel), tuple(rowStride(row)), tuple(l.Pad.Size), pyBool(l.Ceil))}
	},
}

var globalPoolSpec = Spec{
	Kind: KindGlobalPool, Key: "global-pool", Help: "average or max over the whole map → C×1×1", Example: "global-pool avg",
	Main: poolModeParam(true),
	Bare: true,
	work: func(row *Row) Work { return poolWork(row, float64(row.In.H*row.In.W)) },
	eval: func(c *calc, f *flow) {
		in := c.row.In
		c.row.Out = Shape{in.C, 1, 1}
		c.wholeMap(f, in)
	},
	saved: savedPool,
	torch: func(row *Row) Torch {
		if row.Layer.Pool == PoolMax {
			return Torch{Module: "nn.AdaptiveMaxPool2d(1)"}
		}
		return Torch{Module: "nn.AdaptiveAvgPool2d(1)"}
	},
}

var poolToSpec = Spec{
	Kind: KindPoolTo, Key: "pool-to", Help: "average pooling to a fixed size", Example: "pool-to 7",
	Main: &Param{Key: "size", Help: "n or h×w", Type: TPair, Lo: 1, Hi: MaxSpatial, Label: "output size", Need: "an output size",
		get: func(l *Layer) Value { return Value{Pair: l.Size} },
		set: func(l *Layer, v Value) { l.Size = v.Pair }},
	eval: func(c *calc, f *flow) { c.poolTo(f) },
	// Each output averages about (input positions / output positions) values.
	work: func(row *Row) Work {
		return poolWork(row, float64(row.In.H*row.In.W)/float64(max(row.Out.H*row.Out.W, 1)))
	},
	saved: func(row *Row, s *saving) int64 { return s.input(row) },
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("nn.AdaptiveAvgPool2d(%s)", tuple(row.Layer.Size))}
	},
}

// savedPool: pooling keeps its input, max pooling also the index of each
// output's maximum.
func savedPool(row *Row, s *saving) int64 {
	b := s.input(row)
	if row.Layer.Pool == PoolMax {
		out, _ := row.Out.Elements()
		b += mul(&s.ov, out, s.a.IndexBytes)
	}
	return b
}

func (c *calc) pool(f *flow) {
	l, in := c.l, c.row.In
	k, s := l.Kernel, c.stride()
	if !c.atLeast("kernel", min(k.H, k.W), 1) || !c.atLeast("stride", min(s.H, s.W), 1) {
		return
	}
	if l.Pad.Mode == PadSame {
		c.fail(Diagnostic{Code: ErrSamePad, Field: "pooling"})
		return
	}
	var out Shape
	var ok bool
	out.C = in.C
	n0 := len(c.r.Diags)
	out.H, _, _, ok = c.window('h', in.H, k.H, s.H, 1, l.Pad, l.Pad.Size.H, l.Ceil, true)
	if ok {
		out.W, _, _, ok = c.window('w', in.W, k.W, s.W, 1, l.Pad, l.Pad.Size.W, l.Ceil, true)
	}
	if len(c.r.Diags) > n0 {
		c.mergeAxes(n0)
	}
	if !ok {
		return
	}
	c.row.Out = out
	f.rf.H += float64(k.H-1) * f.jump.H
	f.rf.W += float64(k.W-1) * f.jump.W
	f.jump.H *= float64(s.H)
	f.jump.W *= float64(s.W)
}

// adaptiveWindow returns the widest window adaptive pooling uses to map in
// positions onto out: windows run from ⌊i·in/out⌋ to ⌈(i+1)·in/out⌉.
func adaptiveWindow(in, out int64) int64 {
	if in%out == 0 {
		return in / out
	}
	if out > 4096 {
		return in/out + 2
	}
	var widest int64
	for i := int64(0); i < out; i++ {
		start := i * in / out
		end := ((i+1)*in + out - 1) / out
		widest = max(widest, end-start)
	}
	return widest
}

func (c *calc) poolTo(f *flow) {
	in, sz := c.row.In, c.l.Size
	if !c.atLeast("size", min(sz.H, sz.W), 1) {
		return
	}
	c.row.Out = Shape{in.C, sz.H, sz.W}
	wh, ww := adaptiveWindow(in.H, sz.H), adaptiveWindow(in.W, sz.W)
	f.rf.H += float64(wh-1) * f.jump.H
	f.rf.W += float64(ww-1) * f.jump.W
	f.jump.H *= float64(in.H) / float64(sz.H)
	f.jump.W *= float64(in.W) / float64(sz.W)
}

// poolWork is the pooling kinds' time-estimate rule: window FLOPs per
// output element forward (a comparison or an addition per value read),
// one per output element backward (spreading or routing its gradient);
// forward reads the input and writes the output, backward reads the
// output's gradient and writes the input's. Memory-bound. (Max pooling's
// indices are not counted.)
func poolWork(row *Row, window float64) Work {
	in, out := elems(row.In), elems(row.Out)
	w := Work{Class: ClassMemory, FwdFLOPs: window * out, FwdRead: in, FwdWrite: out}
	if row.Grad {
		w.BwdFLOPs, w.BwdRead, w.BwdWrite = out, out, in
	}
	return w
}
