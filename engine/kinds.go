package engine

// calc computes one layer's row; any error it records marks the row failed.
type calc struct {
	r          *Result
	idx        int
	row        *Row
	l          *Layer
	sp         *Spec // the layer kind's description
	unstrided  bool  // later repeat of a block: strides count as 1
	failed     bool
	unresolved bool // a merged input is unknown
	ov         bool // an overflow-checked product overflowed
}

// stride returns the layer's effective stride in this row.
func (c *calc) stride() Pair {
	if c.unstrided {
		return Square(1)
	}
	return c.l.stride()
}

//go:noinline
func (c *calc) fail(d Diagnostic) {
	d.Severity = SevError
	d.Row = c.idx
	c.r.diag(d)
	c.failed = true
}

//go:noinline
func (c *calc) warn(d Diagnostic) {
	d.Severity = SevWarning
	d.Row = c.idx
	c.r.diag(d)
}

// atLeast records an ErrValue unless v ≥ min.
func (c *calc) atLeast(field string, v, min int64) bool {
	if v < min {
		c.fail(Diagnostic{Code: ErrValue, Field: field, A: v, B: min})
		return false
	}
	return true
}

// checkOverflow turns a pending overflow into an error naming field.
func (c *calc) checkOverflow(field string) bool {
	if c.ov {
		c.fail(Diagnostic{Code: ErrOverflow, Field: field})
		c.ov = false
		return false
	}
	return true
}

// run applies the layer kind's rules.
func (c *calc) run(f *flow) {
	if c.sp.eval != nil {
		c.sp.eval(c, f)
		return
	}
	c.fail(Diagnostic{Code: ErrValue, Field: "kind", A: int64(c.l.Kind), B: 1})
}

// wholeMap extends the receptive field over an entire H×W map, as a layer
// whose every output depends on every position does.
func (c *calc) wholeMap(f *flow, in Shape) {
	f.rf.H += float64(in.H-1) * f.jump.H
	f.rf.W += float64(in.W-1) * f.jump.W
	f.jump.H *= float64(in.H)
	f.jump.W *= float64(in.W)
}

// window computes one axis of a sliding-window layer (convolution or
// pooling): o = ⌊(i + 2p − d(k−1) − 1)/s⌋ + 1, rounded up instead when ceil
// is set (dropping a last window that would start in the right padding), or
// o = ⌈i/s⌉ for "same" padding.
func (c *calc) window(ax byte, in, k, s, d int64, pad Padding, p int64, ceil, pool bool) (out, before, after int64, ok bool) {
	keff := add(&c.ov, mul(&c.ov, d, k-1), 1)
	if !c.checkOverflow("kernel") {
		return 0, 0, 0, false
	}
	switch pad.Mode {
	case PadSame:
		out = (in-1)/s + 1 // ⌈in/s⌉ without overflow
		total := add(&c.ov, (out-1)*s, keff) - in
		if !c.checkOverflow("padding") {
			return 0, 0, 0, false
		}
		if total < 0 {
			total = 0
		}
		if total%2 == 1 {
			c.warn(Diagnostic{Code: WarnSameAsym, Field: "padding", Axis: ax, A: total})
		}
		return out, total / 2, total - total/2, true
	case PadValid:
		p = 0
	}
	if !c.atLeast("padding", p, 0) {
		return 0, 0, 0, false
	}
	if pool && 2*p > keff {
		c.fail(Diagnostic{Code: ErrPoolPad, Field: "padding", Axis: ax, A: p, B: keff})
		return 0, 0, 0, false
	}
	padded := add(&c.ov, in, mul(&c.ov, 2, p))
	if !c.checkOverflow("padding") {
		return 0, 0, 0, false
	}
	span := padded - keff
	if ceil {
		// PyTorch's pooling rule: o = ⌊(span + s − 1)/s⌋ + 1 rounding toward
		// −∞, less one when the last window would start in the padding. A
		// window may overhang a small input, as long as one output remains.
		num := span + s - 1
		out = num / s
		if num < 0 && num%s != 0 {
			out--
		}
		out++
		if (out-1)*s >= in+p {
			out--
		}
		if out < 1 {
			c.fail(Diagnostic{Code: ErrOutputSize, Field: "kernel", Axis: ax, A: out, B: in})
			return 0, 0, 0, false
		}
		return out, p, p, true
	}
	if padded < keff {
		c.fail(Diagnostic{Code: ErrKernelTooLarge, Field: "kernel", Axis: ax, A: keff, B: padded})
		return 0, 0, 0, false
	}
	if s == 1 {
		out = span + 1
	} else {
		out = span/s + 1
		if lost := span%s - p; lost > 0 && c.row.Role != RoleShortcut {
			c.warn(Diagnostic{Code: WarnStrideDrop, Field: "stride", Axis: ax, A: s, B: lost, C: in, D: p, E: keff})
		}
	}
	return out, p, p, true
}

// mergeAxes folds a pair of identical height and width warnings recorded
// since diagnostic n0 into one warning about both axes.
func (c *calc) mergeAxes(n0 int) {
	ds := c.r.Diags
	if len(ds)-n0 != 2 {
		return
	}
	a, b := ds[n0], ds[n0+1]
	b.Axis = a.Axis
	if a.Axis == 'h' && ds[n0+1].Axis == 'w' && a == b {
		c.r.Diags[n0].Axis = 'b'
		c.r.Diags = ds[:n0+1]
		c.r.Warnings--
	}
}
