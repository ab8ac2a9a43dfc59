package engine

import "fmt"

// fromParam is the main value of both merges.
var fromParam = Param{Key: "from", Help: "name of an earlier layer or block", Type: TRef,
	Label: "layer name", Need: "the name of an earlier layer", Want: "give the name of an earlier layer or block",
	get: func(l *Layer) Value { return Value{Text: l.From} },
	set: func(l *Layer, v Value) { l.From = v.Text }}

var cropParam = Param{Key: "crop", Help: "yes or no (center-crop the larger map)", Type: TBool, Words: []string{"", "crop"},
	get: func(l *Layer) Value { return Value{Bool: l.Crop} },
	set: func(l *Layer, v Value) { l.Crop = v.Bool }}

var firstParam = Param{Key: "first", Help: "yes or no (the named map's channels come first, as a U-Net's decoder joins its encoder's map)", Type: TBool, Words: []string{"", "first"},
	get: func(l *Layer) Value { return Value{Bool: l.First} },
	set: func(l *Layer, v Value) { l.First = v.Bool }}

var concatSpec = Spec{
	Kind: KindConcat, Key: "concat", Help: "join a named earlier output along the channels", Example: "concat skip1 crop",
	Main: &fromParam, Params: []Param{cropParam, firstParam}, Merge: true,
	eval: func(c *calc, f *flow) { c.merge(f) },
	// Time estimate: a copy of both inputs into the output, no FLOPs; the
	// gradient reaches each input as a view of the output's (no backward).
	work: func(row *Row) Work {
		out := elems(row.Out)
		return Work{Class: ClassMemory, FwdRead: out, FwdWrite: out}
	},
	explain: func(row *Row) []string {
		return []string{fmt.Sprintf("channels %d = %d here + %d from %q", row.Out.C, row.In.C, row.Out.C-row.In.C, row.Layer.From)}
	},
	torch: func(row *Row) Torch {
		a, b := cropped(row)
		if row.Layer.First {
			a, b = b, a
		}
		return Torch{Expr: fmt.Sprintf("torch.cat([%s, %s], 1)", a, b)}
	},
}

var addSpec = Spec{
	Kind: KindAdd, Key: "add", Help: "add a named earlier output", Example: "add skip2",
	Main: &fromParam, Params: []Param{cropParam}, Merge: true,
	eval: func(c *calc, f *flow) { c.merge(f) },
	// Time estimate: one addition per element reading both inputs; the
	// gradient passes to both inputs unchanged (no backward kernel).
	work: func(row *Row) Work {
		out := elems(row.Out)
		return Work{Class: ClassMemory, FwdFLOPs: out, FwdRead: 2 * out, FwdWrite: out}
	},
	// A residual addition with stochastic depth keeps its per-sample keep
	// mask (N×1×1×1, in the activation precision); any other addition
	// keeps nothing.
	saved: func(row *Row, s *saving) int64 {
		if row.Role == RoleResidual && row.Layer.Rate > 0 {
			return s.e
		}
		return 0
	},
	torch: func(row *Row) Torch {
		a, b := cropped(row)
		return Torch{Expr: a + " + " + b}
	},
}

// cropped returns the two inputs of a merge as the export reads them.
func cropped(row *Row) (string, string) {
	if !row.Layer.Crop {
		return "x", OtherVar
	}
	h, w := row.Out.H, row.Out.W
	return fmt.Sprintf("center_crop(x, %d, %d)", h, w), fmt.Sprintf("center_crop(%s, %d, %d)", OtherVar, h, w)
}
