package report

import (
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"

	"stackfit/engine"
)

// WriteText writes a plain-text table of the stack for a terminal: one line
// per layer, then the totals and every diagnostic with its layer.
func WriteText(w io.Writer, s *engine.Stack, r *engine.Result) error {
	title := s.Name
	if title == "" {
		title = "(unnamed stack)"
	}
	fmt.Fprintf(w, "%s  ·  input %s\n\n", title, r.Input)
	t := table{align: []byte("llrrrrr")}
	t.add("at", "layer", "out C×H×W", "params", "MACs", "rf", "jump")
	var prev engine.Path
	for i := range r.Rows {
		row := &r.Rows[i]
		// A header line for each block repeat the row enters.
		for d := 2; d < row.Path.Len(); d += 2 {
			head := prefix(row.Path, d)
			if prev.Len() >= d && prefix(prev, d) == head {
				continue
			}
			if b := s.BlockAt(head); b != nil {
				label := strings.Repeat("  ", d/2-1) + engine.Summary(b)
				if b.Name != "" {
					label += " [" + b.Name + "]"
				}
				label += fmt.Sprintf(" — repeat %d of %d", head.At(d-1), max(b.Repeat, 1))
				t.add(head.String(), label, "", "", "", "", "")
			}
		}
		prev = row.Path
		label := strings.Repeat("  ", (row.Path.Len()-1)/2) + engine.RowSummary(row)
		if row.Layer.Name != "" {
			label += " [" + row.Layer.Name + "]"
		}
		mark := ""
		for _, d := range r.DiagsFor(i) {
			if d.Severity == engine.SevError {
				mark = " ✗"
			} else if d.Severity == engine.SevWarning && mark == "" {
				mark = " !"
			}
		}
		label += mark
		if row.Status != engine.StatusOK {
			t.add(row.Path.String(), label, row.Status.String(), "", "", "", "")
			continue
		}
		t.add(row.Path.String(), label, row.Out.String(), engine.FormatCount(row.Params),
			engine.FormatCount(row.MACs), fpair(row.RF), fpair(row.Jump))
	}
	if err := t.write(w); err != nil {
		return err
	}
	fmt.Fprintf(w, "\ntotal  %s params (%s)  ·  %s buffers  ·  %s MACs per sample\n",
		engine.FormatCount(r.Totals.Params), engine.GroupDigits(r.Totals.Params),
		engine.GroupDigits(r.Totals.Buffers), engine.FormatCount(r.Totals.MACs))
	if len(r.Diags) > 0 {
		fmt.Fprintf(w, "\n%d %s, %d %s, %d %s\n", r.Errors, pl(r.Errors, "error", "errors"), r.Warnings, pl(r.Warnings, "warning", "warnings"), r.Notes, pl(r.Notes, "note", "notes"))
		for _, d := range r.Diags {
			fmt.Fprintf(w, "  %s %s\n", d.Severity, r.Describe(d))
		}
	}
	return nil
}

func pl(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// fpair writes a receptive field or jump: "7" when square, "7×9" otherwise,
// with up to two decimals for fractional values.
func fpair(p engine.FPair) string {
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	if p.H == p.W {
		return f(p.H)
	}
	return f(p.H) + "×" + f(p.W)
}

// table lays out rows of cells in columns, each aligned left ('l') or
// right ('r'), two spaces apart.
type table struct {
	align []byte
	rows  [][]string
}

func (t *table) add(cells ...string) { t.rows = append(t.rows, cells) }

func (t *table) write(w io.Writer) error {
	widths := make([]int, len(t.align))
	for _, r := range t.rows {
		for i, c := range r {
			widths[i] = max(widths[i], utf8.RuneCountInString(c))
		}
	}
	var b strings.Builder
	for _, r := range t.rows {
		b.Reset()
		for i, c := range r {
			pad := strings.Repeat(" ", widths[i]-utf8.RuneCountInString(c))
			if i > 0 {
				b.WriteString("  ")
			}
			if t.align[i] == 'r' {
				b.WriteString(pad + c)
			} else {
				b.WriteString(c + pad)
			}
		}
		b.WriteByte('\n')
		if _, err := io.WriteString(w, strings.TrimRight(b.String(), " \n")+"\n"); err != nil {
			return err
		}
	}
	return nil
}

// prefix returns the first n segments of p.
func prefix(p engine.Path, n int) engine.Path {
	for p.Len() > n {
		p = p.Parent()
	}
	return p
}
