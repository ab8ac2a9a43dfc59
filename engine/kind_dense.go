package engine

import "fmt"

var denseSpec = Spec{
	Kind: KindDense, Key: "dense", Help: "fully connected layer", Example: "dense 10",
	Main: &Param{Key: "units", Help: "output values: 1 to 16777216, xF (F times the input, e.g. x4) or /D",
		Type: TWidth, Lo: 1, Hi: MaxChannels, Label: "units", Need: "a unit count",
		get: func(l *Layer) Value { return Value{Int: l.Filters, Rel: l.Rel} },
		set: setWidth},
	Params: []Param{biasParam,
		{Key: "per-position", Help: "yes or no: apply at every position of a map, over its channels (ConvNeXt's linear layers)",
			Type: TBool, Words: []string{"", "per-position"},
			get: func(l *Layer) Value { return Value{Bool: l.PerPosition} },
			set: func(l *Layer, v Value) { l.PerPosition = v.Bool }},
		widthParams[0], widthParams[1]},
	Weighted: true,
	// Time estimate: a matrix product, 2 FLOPs per MAC forward, about twice that backward.
	work: func(row *Row) Work { return weightedWork(row, ClassMatrix) },
	eval: func(c *calc, f *flow) {
		c.dense()
		f.cl = c.l.PerPosition // permuted back from channels-last
	},
	explain: func(row *Row) []string {
		l := row.Layer
		bias := ""
		if !l.NoBias {
			bias = fmt.Sprintf(" + %d", row.Out.C)
		}
		out := []string{fmt.Sprintf("params = %d·%d%s = %s; MACs = %s", row.In.C, row.Out.C, bias, GroupDigits(row.Params), GroupDigits(row.MACs))}
		if l.PerPosition {
			out[0] = fmt.Sprintf("params = %d·%d%s = %s; MACs = %d·%d weights × %d·%d positions = %s",
				row.In.C, row.Out.C, bias, GroupDigits(row.Params), row.In.C, row.Out.C, row.In.H, row.In.W, FormatCount(row.MACs))
		}
		if !l.Rel.IsZero() {
			out = append(out, widthLine(row))
		}
		return out
	},
	// A linear layer keeps its input; applied per position to a map not
	// stored channels-last, the permuted input is first copied into a
	// contiguous tensor of its own, and autograd keeps that copy (checked
	// with testdata/reference).
	saved: func(row *Row, s *saving) int64 {
		if row.Layer.PerPosition && row.In.Spatial() && !row.InChannelsLast {
			n, _ := row.In.Elements()
			return mul(&s.ov, n, s.e)
		}
		return s.input(row)
	},

	torch: func(row *Row) Torch {
		if row.Layer.PerPosition {
			return Torch{Module: fmt.Sprintf("PositionDense(%d, %d, bias=%s)", row.In.C, row.Out.C, pyBool(!row.Layer.NoBias))}
		}
		return Torch{Module: fmt.Sprintf("Dense(%d, %d, bias=%s)", row.In.C, row.Out.C, pyBool(!row.Layer.NoBias))}
	},
}

func (c *calc) dense() {
	in, l := c.row.In, c.l
	units, ok := c.width("units")
	if !ok {
		return
	}
	if in.Spatial() && !l.PerPosition {
		c.fail(Diagnostic{Code: ErrDenseSpatial, Field: "input", A: in.C, B: in.H, C: in.W})
		return
	}
	w := mul(&c.ov, in.C, units)
	params := w
	if !l.NoBias {
		params = add(&c.ov, w, units)
	}
	// Per position, every weight is used once at each position.
	macs := mul(&c.ov, w, mul(&c.ov, in.H, in.W))
	if !c.checkOverflow("parameters") {
		return
	}
	c.row.Out = Shape{units, in.H, in.W}
	c.row.Params, c.row.MACs = params, macs
}
