package engine

import (
	"fmt"
	"strconv"
)

// Explain returns the arithmetic behind row i's numbers, one line each:
// the output size, the parameters, the multiply-accumulates and the
// receptive field, written with the row's own numbers.
func (r *Result) Explain(i int) []string {
	if i < 0 || i >= len(r.Rows) {
		return nil
	}
	row := &r.Rows[i]
	l := row.Layer
	if row.Status != StatusOK {
		return []string{fmt.Sprintf("numbers unknown: %s", row.Status)}
	}
	var out []string
	in := row.In
	s := l.stride()
	if row.Unstrided {
		s = Square(1)
	}
	d := l.dilation()
	switch l.Kind {
	case KindConv, KindPool:
		if l.Kind == KindPool {
			d = Square(1)
		}
		out = append(out, axisLines(l, in, row.Out, s, d)...)
	case KindDeconv:
		out = append(out, pairLine("out", row.Out,
			fmt.Sprintf("(%d − 1)·%d − 2·%d + %s + %d + 1", in.H, s.H, l.Pad.Size.H, keffText(l.Kernel.H, d.H), l.OutPad.H),
			fmt.Sprintf("(%d − 1)·%d − 2·%d + %s + %d + 1", in.W, s.W, l.Pad.Size.W, keffText(l.Kernel.W, d.W), l.OutPad.W)))
	case KindUpsample:
		out = append(out, fmt.Sprintf("out %d×%d = %d·%d × %d·%d", row.Out.H, row.Out.W, in.H, l.Factor.H, in.W, l.Factor.W))
	case KindFlatten:
		out = append(out, fmt.Sprintf("out %d = %d·%d·%d values", row.Out.C, in.C, in.H, in.W))
	case KindConcat:
		out = append(out, fmt.Sprintf("channels %d = %d here + %d from %q", row.Out.C, in.C, row.Out.C-in.C, l.From))
	}
	switch l.Kind {
	case KindConv, KindDeconv:
		g := l.Groups
		if l.Depthwise {
			g = in.C
		}
		g = max(g, 1)
		w := l.Filters * (in.C / g) * l.Kernel.H * l.Kernel.W
		bias := ""
		if !l.NoBias {
			bias = fmt.Sprintf(" + %d", l.Filters)
		}
		perGroup := strconv.FormatInt(in.C, 10)
		if g > 1 {
			perGroup = fmt.Sprintf("(%d/%d)", in.C, g)
		}
		out = append(out, fmt.Sprintf("params = %d·%d·%s·%d%s = %s", l.Kernel.H, l.Kernel.W, perGroup, l.Filters, bias, GroupDigits(row.Params)))
		pos := fmt.Sprintf("%d·%d output positions", row.Out.H, row.Out.W)
		if l.Kind == KindDeconv {
			pos = fmt.Sprintf("%d·%d input positions", in.H, in.W)
		}
		out = append(out, fmt.Sprintf("MACs = %s weights × %s = %s", GroupDigits(w), pos, FormatCount(row.MACs)))
	case KindDense:
		bias := ""
		if !l.NoBias {
			bias = fmt.Sprintf(" + %d", l.Filters)
		}
		out = append(out, fmt.Sprintf("params = %d·%d%s = %s; MACs = %s", in.C, l.Filters, bias, GroupDigits(row.Params), GroupDigits(row.MACs)))
	case KindNorm:
		if row.Params > 0 {
			out = append(out, fmt.Sprintf("params = 2·%d = %s (scale and shift per channel)", in.C, GroupDigits(row.Params)))
		}
		if row.Buffers > 0 {
			out = append(out, fmt.Sprintf("buffers = 2·%d + 1 = %s (running mean, variance, step count)", in.C, GroupDigits(row.Buffers)))
		}
	}
	out = append(out, fmt.Sprintf("sees %s input pixels, step %s between outputs", fpairText(row.RF), fpairText(row.Jump)))
	return out
}

// axisLines explains a sliding-window output size per axis.
func axisLines(l *Layer, in, o Shape, s, d Pair) []string {
	if l.Pad.Mode == PadSame {
		before, after := l.ResolvedPadding(in)
		return []string{pairLine("out", o,
			fmt.Sprintf("⌈%d/%d⌉ (pads %d before, %d after)", in.H, s.H, before.H, after.H),
			fmt.Sprintf("⌈%d/%d⌉ (pads %d before, %d after)", in.W, s.W, before.W, after.W))}
	}
	p := l.Pad.Size
	if l.Pad.Mode == PadValid {
		p = Pair{}
	}
	open, close := "⌊", "⌋"
	if l.Ceil {
		open, close = "⌈", "⌉"
	}
	f := func(i, pp, k, dd, ss int64) string {
		return fmt.Sprintf("%s(%d + 2·%d − %s)/%d%s + 1", open, i, pp, keffText(k, dd), ss, close)
	}
	return []string{pairLine("out", o, f(in.H, p.H, l.Kernel.H, d.H, s.H), f(in.W, p.W, l.Kernel.W, d.W, s.W))}
}

// keffText writes a kernel's span: "3", or "2·(3 − 1) + 1" when dilated.
func keffText(k, d int64) string {
	if d == 1 {
		return strconv.FormatInt(k, 10)
	}
	return fmt.Sprintf("%d·(%d − 1) + 1", d, k)
}

// pairLine writes "label h×w: formula = h" (once when both axes agree).
func pairLine(label string, o Shape, fh, fw string) string {
	if fh == fw && o.H == o.W {
		return fmt.Sprintf("%s %d×%d: %s = %d", label, o.H, o.W, fh, o.H)
	}
	return fmt.Sprintf("%s height %s = %d; width %s = %d", label, fh, o.H, fw, o.W)
}

func fpairText(p FPair) string {
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	if p.H == p.W {
		return f(p.H) + "×" + f(p.W)
	}
	return f(p.H) + "×" + f(p.W)
}
