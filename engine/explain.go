package engine

import (
	"fmt"
	"strconv"
)

// Explain returns the arithmetic behind row i's numbers, one line each:
// the output size, the parameters, the multiply-accumulates (each by its
// kind's rule) and the receptive field, written with the row's own numbers.
func (r *Result) Explain(i int) []string {
	if i < 0 || i >= len(r.Rows) {
		return nil
	}
	row := &r.Rows[i]
	if row.Status != StatusOK {
		return []string{fmt.Sprintf("numbers unknown: %s", row.Status)}
	}
	out := SpecOf(row.Layer.Kind).explainRow(row)
	return append(out, fmt.Sprintf("sees %s input pixels, step %s between outputs", fpairText(row.RF), fpairText(row.Jump)))
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
	return f(p.H) + "×" + f(p.W)
}
