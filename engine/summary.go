package engine

import (
	"strconv"
	"strings"
)

// Summary writes a layer as one short line, e.g. "conv 64 k3 s2 p1" or
// "pool max k3 s2 ceil": the kind, its main value, then the fields that
// differ from their defaults in their quick-entry form. ParseQuick reads
// it back.
func Summary(l *Layer) string {
	if l.Unit != "" {
		return useSummary(l)
	}
	n := l.Normalized()
	sp := SpecOf(n.Kind)
	var b strings.Builder
	b.WriteString(sp.Key)
	word := func(s string) {
		if s != "" {
			b.WriteByte(' ')
			b.WriteString(s)
		}
	}
	if m := sp.Main; m != nil {
		if v := m.get(&n); m.Type != TRef || v.Text != "" {
			word(m.Quick + m.Text(v))
		}
	}
	for i := range sp.Params {
		p := &sp.Params[i]
		if p.Applies(&n) && (p.Required || !p.IsDefault(&n)) {
			word(p.quickText(p.get(&n)))
		}
	}
	return b.String()
}

// quickText writes a field's value as quick entry reads it, or "" when the
// field has no quick-entry form.
func (p *Param) quickText(v Value) string {
	switch p.Type {
	case TBool:
		return wordAt(p.Words, v.Bool)
	case TToggle:
		return wordOf(p.Words, int(v.Int))
	case TChoice:
		if p.Quick != "" {
			return p.Quick + p.Text(v)
		}
		if p.Words == nil {
			return p.Text(v)
		}
		return wordOf(p.Words, int(v.Int))
	case TPad:
		if v.Pad.Mode != PadExplicit {
			return wordOf(p.Words, int(v.Pad.Mode)-1)
		}
		return p.Quick + pairText(v.Pad.Size)
	case TGroups:
		if v.Bool {
			return wordOf(p.Words, 0)
		}
	case TFloat:
		if p.QuickBare {
			return p.Text(v)
		}
	}
	if p.Quick == "" {
		return ""
	}
	return p.Quick + p.Text(v)
}

func wordOf(words []string, i int) string {
	if i < 0 || i >= len(words) {
		return ""
	}
	return words[i]
}

func wordAt(words []string, b bool) string {
	if b {
		return wordOf(words, 1)
	}
	return wordOf(words, 0)
}

// RowSummary is Summary of the layer as the row computed it: in later
// repeats of a block, strides count as 1.
func RowSummary(r *Row) string {
	if r.Layer == nil {
		return ""
	}
	if r.Role == RoleResidual {
		if r.Layer.Rate > 0 {
			return "add shortcut drop-path " + strconv.FormatFloat(r.Layer.Rate, 'g', -1, 64)
		}
		return "add shortcut"
	}
	if r.Role == RoleGate {
		return "multiply by gate"
	}
	if r.Role == RoleDenseCat {
		return "concat repeat input"
	}
	if r.Role == RoleJoin && r.Layer.JoinAdd {
		return "add " + strconv.Itoa(len(r.Layer.Body)) + " branches"
	}
	if r.Role == RoleJoin {
		return "join " + strconv.Itoa(len(r.Layer.Body)) + " branches"
	}
	if !r.Unstrided {
		return Summary(r.Layer)
	}
	l := *r.Layer
	l.Stride = Square(1)
	return Summary(&l)
}

// pairText writes "3" for a square pair and "3x5" otherwise.
func pairText(p Pair) string {
	if p.H == p.W {
		return strconv.FormatInt(p.H, 10)
	}
	return strconv.FormatInt(p.H, 10) + "x" + strconv.FormatInt(p.W, 10)
}

// useSummary writes a use of a unit: "unit cna c=64 k=1", then ×N when
// it repeats.
func useSummary(l *Layer) string {
	var b strings.Builder
	b.WriteString("unit ")
	b.WriteString(l.Unit)
	for _, a := range l.Args {
		b.WriteByte(' ')
		b.WriteString(a.Name)
		b.WriteByte('=')
		b.WriteString(a.Value)
	}
	if l.Repeat > 1 {
		b.WriteString(" ×" + strconv.FormatInt(l.Repeat, 10))
	}
	return b.String()
}
