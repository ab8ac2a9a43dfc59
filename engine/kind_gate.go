package engine

import "fmt"

var gateSpec = Spec{
	Kind: KindGate, Key: "gate", Help: "scale each channel by a gate its layers compute from the map (squeeze-and-excitation)",
	Example: "gate channel",
	Main: &Param{Key: "mode", Help: "channel: one factor per channel", Type: TChoice, Choices: []string{"channel"},
		Need: "a mode: channel",
		get:  func(*Layer) Value { return Value{} },
		set:  func(*Layer, Value) {}},
	Body: true,
	eval: func(c *calc, f *flow) {
		if c.row.Role != RoleGate {
			c.fail(Diagnostic{Code: ErrNesting, Field: "gate"}) // nested too deep to open
			return
		}
		c.gateMul(f)
	},
	explain: func(row *Row) []string {
		return []string{fmt.Sprintf("out = map × gate, one factor per channel: %d·%d·%d products, 0 MACs by our convention", row.Out.C, row.Out.H, row.Out.W)}
	},
	// The product keeps the map for the gate's gradient and the gate for
	// the map's, as autograd's mul does.
	saved: func(row *Row, s *saving) int64 {
		var b int64
		if row.OtherGrad {
			b += s.input(row)
		}
		if row.Grad {
			b += s.keep(row.OtherStore, row.Out.C)
		}
		return b
	},
}

// gateMul applies the gate the body left in r.other to the flow.
func (c *calc) gateMul(f *flow) {
	g := c.r.other
	if !g.ok {
		c.unresolved = true
		return
	}
	in := c.row.In
	if g.shape != (Shape{in.C, 1, 1}) {
		c.fail(Diagnostic{Code: ErrGateShape, Field: "gate", A: g.shape.C, B: g.shape.H, C: g.shape.W, D: in.C})
		return
	}
	c.row.Out = in
	c.row.OtherStore, c.row.OtherGrad = g.store, g.grad
	f.grad = f.grad || g.grad
	// The gate has seen the whole map (through its pooling): the product's
	// receptive field is the wider of the two.
	f.rf.H, f.rf.W = max(f.rf.H, g.rf.H), max(f.rf.W, g.rf.W)
}
