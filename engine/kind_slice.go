package engine

import "fmt"

// keepSpec keeps the first N channels of the map and drops the rest, as
// GhostNet's Ghost module does after joining its primary and cheap
// features (Han et al. 2020, "GhostNet: More Features from Cheap
// Operations": out[:, :oup]). In PyTorch the result is a view of its
// input, so it writes no tensor of its own.
var keepSpec = Spec{
	Kind: KindKeep, Key: "keep", Help: "keep the first N channels, drop the rest (a channel slice)", Example: "keep 64",
	Main: &Param{Key: "channels", Help: "channels to keep from the front, at most the input's, e.g. 64", Type: TInt, Lo: 1, Hi: MaxChannels,
		Label: "channels", Need: "a channel count",
		get: func(l *Layer) Value { return Value{Int: l.Keep} },
		set: func(l *Layer, v Value) { l.Keep = v.Int }},
	View: true,
	eval: func(c *calc, f *flow) {
		in, n := c.row.In, c.l.Keep
		if !c.atLeast("channels", n, 1) {
			return
		}
		if n > in.C {
			c.fail(Diagnostic{Code: ErrKeepChannels, Field: "channels", A: n, B: in.C})
			return
		}
		c.row.Out = Shape{n, in.H, in.W}
	},
	explain: func(row *Row) []string {
		return []string{fmt.Sprintf("out = input channels 1 to %d of %d, a view of the input: nothing copied, 0 params, 0 MACs",
			row.Out.C, row.In.C)}
	},
	// Slicing keeps nothing for the backward pass (saved_tensors_hooks on
	// PyTorch 1.13: its backward needs only the sizes); a layer after it
	// that keeps its input keeps the whole storage it is a view of, which
	// the memory model counts through the view's storage.
	torch: func(row *Row) Torch { return Torch{Expr: fmt.Sprintf("x[:, :%d]", row.Layer.Keep)} },
}
