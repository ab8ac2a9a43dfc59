package engine

import "fmt"

var denseSpec = Spec{
	Kind: KindDense, Key: "dense", Help: "fully connected layer", Example: "dense 10",
	Main: &Param{Key: "units", Help: "output values, 1 to 16777216", Type: TInt, Lo: 1, Hi: MaxChannels,
		Label: "units", Need: "a unit count",
		get: func(l *Layer) Value { return Value{Int: l.Filters} },
		set: func(l *Layer, v Value) { l.Filters = v.Int }},
	Params:   []Param{biasParam},
	Weighted: true,
	eval:     func(c *calc, f *flow) { c.dense() },
	explain: func(row *Row) []string {
		l := row.Layer
		bias := ""
		if !l.NoBias {
			bias = fmt.Sprintf(" + %d", l.Filters)
		}
		return []string{fmt.Sprintf("params = %d·%d%s = %s; MACs = %s", row.In.C, l.Filters, bias, GroupDigits(row.Params), GroupDigits(row.MACs))}
	},
	saved: func(row *Row, s *saving) int64 { return s.input(row) },
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("Dense(%d, %d, bias=%s)", row.In.C, row.Layer.Filters, pyBool(!row.Layer.NoBias))}
	},
}

func (c *calc) dense() {
	in, l := c.row.In, c.l
	if !c.atLeast("units", l.Filters, 1) {
		return
	}
	if in.Spatial() {
		c.fail(Diagnostic{Code: ErrDenseSpatial, Field: "input", A: in.C, B: in.H, C: in.W})
		return
	}
	w := mul(&c.ov, in.C, l.Filters)
	params := w
	if !l.NoBias {
		params = add(&c.ov, w, l.Filters)
	}
	if !c.checkOverflow("parameters") {
		return
	}
	c.row.Out = Shape{l.Filters, 1, 1}
	c.row.Params, c.row.MACs = params, w
}
