package engine

import "fmt"

var normSpec = Spec{
	Kind: KindNorm, Key: "norm", Help: "batch, group, instance or layer normalisation", Example: "norm batch",
	Main: &Param{Key: "type", Help: "batch, group, instance or layer", Type: TChoice, Choices: normNames[:],
		Need: "a type: batch, group, instance or layer",
		get:  func(l *Layer) Value { return Value{Int: int64(l.Norm)} },
		set:  func(l *Layer, v Value) { l.Norm = NormKind(v.Int) }},
	Params: []Param{
		{Key: "groups", Help: "channel groups (group norm)", Type: TInt, Lo: 0, Hi: MaxChannels, Quick: "g",
			Required: true, Need: "group norm needs groups", YAMLHint: "groups: 32", QuickHint: "g32",
			Only:    func(l *Layer) bool { return l.Norm == NormGroup },
			OnlyMsg: "groups applies only to group norm; remove it or write norm: group",
			get:     func(l *Layer) Value { return Value{Int: l.NormGroups} },
			set:     func(l *Layer, v Value) { l.NormGroups = v.Int }},
		{Key: "affine", Help: "yes, no or default", Type: TToggle, Words: []string{"", "affine", "noaffine"},
			Want: "give yes, no or default",
			get:  func(l *Layer) Value { return Value{Int: int64(l.Affine)} },
			set:  func(l *Layer, v Value) { l.Affine = Toggle(v.Int) }},
		{Key: "eps", Help: "the small number added to the variance, above 0 and below 1; when left out, the stack's default, else PyTorch's 1e-5", Type: TFloat, FLo: 0, FHi: 1,
			Quick: "eps", FileDefault: true, Want: "give a number above 0 and below 1, e.g. 0.001",
			get:  func(l *Layer) Value { return Value{Float: l.Eps} },
			set:  func(l *Layer, v Value) { l.Eps = v.Float },
			show: func(l *Layer) Value { return Value{Float: normEps(l)} }},
	},
	eval: func(c *calc, f *flow) {
		c.norm()
		// Layer norm runs on the channels-last view and is permuted back:
		// its output is stored channels-last.
		f.cl = f.cl || c.l.Norm == NormLayer
	},
	keepLayout: true,
	work:       normWork,
	explain: func(row *Row) []string {
		var out []string
		if row.Params > 0 {
			out = append(out, fmt.Sprintf("params = 2·%d = %s (scale and shift per channel)", row.In.C, GroupDigits(row.Params)))
		}
		if row.Buffers > 0 {
			out = append(out, fmt.Sprintf("buffers = 2·%d + 1 = %s (running mean, variance, step count)", row.In.C, GroupDigits(row.Buffers)))
		}
		return out
	},
	saved: savedNorm,
	torch: func(row *Row) Torch {
		l, c := row.Layer, row.In.C
		affine := pyBool(l.Affine.Or(l.Norm != NormInstance))
		if l.Eps > 0 {
			affine += ", eps=" + pyFloat(l.Eps)
		}
		switch l.Norm {
		case NormGroup:
			return Torch{Module: fmt.Sprintf("nn.GroupNorm(%d, %d, affine=%s)", l.NormGroups, c, affine)}
		case NormInstance:
			return Torch{Module: fmt.Sprintf("nn.InstanceNorm2d(%d, affine=%s)", c, affine)}
		case NormLayer:
			return Torch{Module: fmt.Sprintf("ChannelLayerNorm(%d, affine=%s)", c, affine)}
		}
		return Torch{Module: fmt.Sprintf("nn.BatchNorm2d(%d, affine=%s)", c, affine)}
	},
}

// normEps is the layer's ε with PyTorch's default applied.
func normEps(l *Layer) float64 {
	if l.Eps > 0 {
		return l.Eps
	}
	return 1e-5
}

// savedNorm: a norm keeps its input, and group, instance and layer norm
// their per-sample statistics (fp32) as well. Under autocast layer and
// group norm run in fp32 (on CUDA and the CPU alike, per PyTorch's
// autocast op lists), so what they keep is an fp32 copy of the input, a
// tensor of its own (checked with bf16 autocast on the CPU,
// testdata/memory/step_reference.json).
func savedNorm(row *Row, s *saving) int64 {
	l, ov := row.Layer, &s.ov
	var b int64
	if s.autocast && (l.Norm == NormLayer || l.Norm == NormGroup) {
		in, _ := row.In.Elements()
		b = mul(ov, in, 4)
	} else {
		b = s.input(row)
	}
	switch l.Norm {
	case NormGroup:
		b += mul(ov, 2*l.NormGroups, 4) // mean and reciprocal std per group
	case NormInstance:
		stats := int64(2)
		if l.Affine == On {
			stats = 3 // the scale is expanded per sample as well
		}
		b += mul(ov, mul(ov, stats, row.In.C), 4)
	case NormLayer:
		b += mul(ov, mul(ov, 2, mul(ov, row.In.H, row.In.W)), 4)
	}
	return b
}

func (c *calc) norm() {
	in := c.row.In
	l := c.l
	c.row.Out = in
	switch l.Norm {
	case NormGroup:
		if !c.atLeast("groups", l.NormGroups, 1) {
			return
		}
		if in.C%l.NormGroups != 0 {
			c.fail(Diagnostic{Code: ErrNormGroups, Field: "groups", A: in.C, B: l.NormGroups})
			return
		}
	case NormInstance:
		if !in.Spatial() {
			c.fail(Diagnostic{Code: ErrNormSingle, Field: "norm"})
			return
		}
	case NormBatch:
		// running mean, running variance and a step counter.
		c.row.Buffers = add(&c.ov, mul(&c.ov, 2, in.C), 1)
	}
	if l.Affine.Or(l.Norm != NormInstance) {
		c.row.Params = mul(&c.ov, 2, in.C)
	}
	c.checkOverflow("parameters")
}

// normWork is the normalisations' time-estimate rule, memory-bound:
// forward reads the input twice (the statistics, then the normalisation)
// and writes the output, about 7 FLOPs per element (sum, square and add
// for the statistics; subtract and scale to normalise; the affine scale
// and shift); backward about twice the forward's FLOPs, reading the
// output's gradient and the input (twice: the reductions, then the
// gradient) and writing the input's gradient.
func normWork(row *Row) Work {
	in := elems(row.In)
	w := Work{Class: ClassNorm, FwdFLOPs: 7 * in, FwdRead: 2 * in, FwdWrite: in}
	if row.Grad || row.Params > 0 {
		w.BwdFLOPs, w.BwdRead, w.BwdWrite = 14*in, 3*in, in
	}
	return w
}
