package engine

import "fmt"

var upsampleSpec = Spec{
	Kind: KindUpsample, Key: "upsample", Help: "repeat or interpolate by an integer factor", Example: "upsample 2 bilinear",
	Main: &Param{Key: "factor", Help: "n or h×w", Type: TPair, Lo: 1, Hi: MaxFactor, Label: "factor", Need: "a factor",
		get: func(l *Layer) Value { return Value{Pair: l.Factor} },
		set: func(l *Layer, v Value) { l.Factor = v.Pair }},
	Params: []Param{{Key: "mode", Help: "nearest or bilinear", Type: TChoice, Choices: []string{"nearest", "bilinear"},
		get: func(l *Layer) Value { return Value{Int: int64(l.Upsample)} },
		set: func(l *Layer, v Value) { l.Upsample = UpsampleMode(v.Int) }}},
	eval: func(c *calc, f *flow) { c.upsample(f) },
	explain: func(row *Row) []string {
		in, fa := row.In, row.Layer.Factor
		return []string{fmt.Sprintf("out %d×%d = %d·%d × %d·%d", row.Out.H, row.Out.W, in.H, fa.H, in.W, fa.W)}
	},
	torch: func(row *Row) Torch {
		fa := row.Layer.Factor
		if row.Layer.Upsample == UpBilinear {
			return Torch{Module: fmt.Sprintf("nn.Upsample(scale_factor=(%d.0, %d.0), mode=\"bilinear\", align_corners=False)", fa.H, fa.W)}
		}
		return Torch{Module: fmt.Sprintf("nn.Upsample(scale_factor=(%d.0, %d.0), mode=\"nearest\")", fa.H, fa.W)}
	},
}

var flattenSpec = Spec{
	Kind: KindFlatten, Key: "flatten", Help: "C×H×W → one vector", Example: "flatten",
	Bare: true, View: true,
	eval: func(c *calc, f *flow) {
		in := c.row.In
		n, ov := in.Elements()
		if ov {
			c.fail(Diagnostic{Code: ErrOverflow, Field: "flattened size"})
			return
		}
		c.row.Out = Shape{n, 1, 1}
		c.wholeMap(f, in)
	},
	explain: func(row *Row) []string {
		in := row.In
		return []string{fmt.Sprintf("out %d = %d·%d·%d values", row.Out.C, in.C, in.H, in.W)}
	},
	torch: func(*Row) Torch { return Torch{Expr: "x.reshape(x.shape[0], -1, 1, 1)"} },
}

var reshapeSpec = Spec{
	Kind: KindReshape, Key: "reshape", Help: "reinterpret values as a new C×H×W", Example: "reshape 1024x4x4",
	Main: &Param{Key: "target", Help: "channels×height×width, e.g. 1024x4x4", Type: TShape, Label: "target", Need: "a target",
		get: func(l *Layer) Value { return Value{Shape: l.Target} },
		set: func(l *Layer, v Value) { l.Target = v.Shape }},
	View: true,
	eval: func(c *calc, f *flow) { c.reshape() },
	torch: func(row *Row) Torch {
		t := row.Layer.Target
		return Torch{Expr: fmt.Sprintf("x.reshape(x.shape[0], %d, %d, %d)", t.C, t.H, t.W)}
	},
}

func (c *calc) upsample(f *flow) {
	in, fa := c.row.In, c.l.Factor
	if !c.atLeast("factor", min(fa.H, fa.W), 1) {
		return
	}
	out := Shape{in.C, mul(&c.ov, in.H, fa.H), mul(&c.ov, in.W, fa.W)}
	if !c.checkOverflow("output size") {
		return
	}
	c.row.Out = out
	if c.l.Upsample == UpBilinear {
		// Bilinear interpolation mixes two neighbours per axis.
		if fa.H > 1 {
			f.rf.H += f.jump.H
		}
		if fa.W > 1 {
			f.rf.W += f.jump.W
		}
	}
	f.jump.H /= float64(fa.H)
	f.jump.W /= float64(fa.W)
}

func (c *calc) reshape() {
	t := c.l.Target
	if !c.atLeast("target channels", t.C, 1) || !c.atLeast("target height", t.H, 1) || !c.atLeast("target width", t.W, 1) {
		return
	}
	want, ov1 := t.Elements()
	have, ov2 := c.row.In.Elements()
	if ov1 || ov2 {
		c.fail(Diagnostic{Code: ErrOverflow, Field: "reshape size"})
		return
	}
	if want != have {
		c.fail(Diagnostic{Code: ErrReshapeCount, Field: "reshape", A: want, B: have})
		return
	}
	c.row.Out = t
}
