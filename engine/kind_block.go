package engine

import "strings"

var blockSpec = Spec{
	Kind: KindBlock, Key: "block", Help: "a group of layers, repeated, optionally residual", Example: "block 2 residual then relu",
	Main: &Param{Key: "repeat", Help: "times the body runs, 1 to 1024", Type: TInt, Lo: 1, Hi: MaxRepeat,
		Label: "repeats", Quick: "×", Optional: true, Default: Value{Int: 1},
		get:  func(l *Layer) Value { return Value{Int: l.Repeat} },
		set:  func(l *Layer, v Value) { l.Repeat = v.Int },
		show: func(l *Layer) Value { return Value{Int: max(l.Repeat, 1)} }},
	Params: []Param{
		{Key: "residual", Help: "yes or no", Type: TBool, Words: []string{"", "residual"},
			get: func(l *Layer) Value { return Value{Bool: l.Residual} },
			set: func(l *Layer, v Value) { l.Residual = v.Bool }},
		{Key: "shortcut-norm", Help: "yes or no (batch norm after a projection shortcut)", Type: TBool, Default: Value{Bool: true},
			Only:    func(l *Layer) bool { return l.Residual },
			OnlyMsg: "shortcut-norm needs residual: true",
			get:     func(l *Layer) Value { return Value{Bool: !l.NoShortcutNorm} },
			set:     func(l *Layer, v Value) { l.NoShortcutNorm = !v.Bool }},
		{Key: "after", Help: "activation after the addition, or none", Type: TChoice, Choices: actList, None: "none", Quick: "then ",
			Want:      "give none or one of " + strings.Join(actList, ", "),
			Only:      func(l *Layer) bool { return l.Residual },
			OnlyMsg:   "after (the activation after the addition) needs residual: true",
			OnlyQuick: "follows a residual addition; add residual",
			get: func(l *Layer) Value {
				if !l.HasPostAct {
					return Value{Int: -1}
				}
				return Value{Int: int64(l.PostAct)}
			},
			set: func(l *Layer, v Value) { l.PostAct, l.HasPostAct = ActKind(max(v.Int, 0)), v.Int >= 0 }},
		{Key: "shortcut", Help: "projection (a 1×1 conv where shapes differ) or identity (add only where they match)",
			Type: TChoice, Choices: []string{"projection", "identity"}, Words: []string{"", "identity"},
			Only:    func(l *Layer) bool { return l.Residual },
			OnlyMsg: "shortcut needs residual: true",
			get: func(l *Layer) Value {
				if l.IdentityOnly {
					return Value{Int: 1}
				}
				return Value{}
			},
			set: func(l *Layer, v Value) { l.IdentityOnly = v.Int == 1 }},
		{Key: "drop-path", Help: "stochastic depth: chance a sample skips the body while training, 0 to below 1",
			Type: TFloat, FLo: 0, FHi: 1, Quick: "dp", Want: "give a number at least 0 and below 1, e.g. 0.1",
			Only:    func(l *Layer) bool { return l.Residual },
			OnlyMsg: "drop-path needs residual: true",
			get:     func(l *Layer) Value { return Value{Float: l.DropPath} },
			set:     func(l *Layer, v Value) { l.DropPath = v.Float }},
		{Key: "dense-links", Help: "yes or no: each repeat's output joins its input along the channels", Type: TBool,
			Words:     []string{"", "dense-links"},
			Only:      func(l *Layer) bool { return !l.Residual },
			OnlyMsg:   "dense-links and residual exclude each other; keep one",
			OnlyQuick: "excludes residual; keep one",
			get:       func(l *Layer) Value { return Value{Bool: l.DenseLinks} },
			set:       func(l *Layer, v Value) { l.DenseLinks = v.Bool }},
		{Key: "strides", Help: "first (later repeats run with stride 1) or all", Type: TChoice, Choices: []string{"first", "all"},
			Words: []string{"", "strides-all"},
			get: func(l *Layer) Value {
				if l.AllStrides {
					return Value{Int: 1}
				}
				return Value{}
			},
			set: func(l *Layer, v Value) { l.AllStrides = v.Int == 1 }},
	},
	Body: true,
	// Blocks expand into rows of their own; one is a row itself only when
	// nested too deep.
	eval: func(c *calc, f *flow) { c.fail(Diagnostic{Code: ErrNesting, Field: "block"}) },
}
