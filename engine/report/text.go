package report

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode/utf8"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// WriteText writes a plain-text table of the stack for a terminal: one line
// per layer, then the totals, the memory estimate and every diagnostic.
func WriteText(w io.Writer, an *engine.Analysis) error {
	s, r := an.Stack, an.Result
	title := s.Name
	if title == "" {
		title = "(unnamed stack)"
	}
	fmt.Fprintf(w, "%s  ·  input %s\n\n", textsafe.Line(title), r.Input)
	// The layer table is streamed: one pass finds the column widths, a
	// second writes the lines, so a stack of a million rows is never held
	// as text.
	t := &table{align: []byte("llrrrrr"), measure: true}
	layerLines(t, an)
	bw := bufio.NewWriterSize(w, 64<<10)
	t.measure, t.out = false, bw
	layerLines(t, an)
	if t.err != nil {
		return t.err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\ntotal  %s params (%s)  ·  %s buffers  ·  %s MACs per sample\n",
		engine.FormatCount(r.Totals.Params), engine.GroupDigits(r.Totals.Params),
		engine.GroupDigits(r.Totals.Buffers), engine.FormatCount(r.Totals.MACs))
	writeMemory(w, an)
	if an.Fit.HasBudget {
		textFitMap(w, an)
	}
	writeTime(w, an)
	if len(r.Diags) > 0 {
		fmt.Fprintf(w, "\n%d %s, %d %s, %d %s\n", r.Errors, pl(r.Errors, "error", "errors"), r.Warnings, pl(r.Warnings, "warning", "warnings"), r.Notes, pl(r.Notes, "note", "notes"))
		for _, d := range r.Diags {
			fmt.Fprintf(w, "  %s %s\n", d.Severity, textsafe.Line(r.Describe(d)))
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
// right ('r'), two spaces apart. Every cell is made terminal-safe as it is
// added (layer names and merge sources come from the stack file).
// layerLines adds the layer table's lines to t: a header, a line per
// block repeat or branch a row enters, and a line per row.
func layerLines(t *table, an *engine.Analysis) {
	s, r := an.Stack, an.Result
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
			if b, br := s.BodyAt(head); b != nil {
				label := strings.Repeat("  ", d/2-1) + engine.Summary(b)
				if b.Name != "" {
					label += " [" + b.Name + "]"
				}
				switch {
				case b.Kind == engine.KindBlock && (b.Unit == "" || b.Repeat > 1):
					label += fmt.Sprintf(" — repeat %d of %d", head.At(d-1), max(b.Repeat, 1))
				case br != nil:
					label += fmt.Sprintf(" — branch %d of %d", head.At(d-1), len(b.Body))
					if br.From != "" {
						label += " from " + br.From
					}
					if br.Name != "" {
						label += " [" + br.Name + "]"
					}
				}
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
}

type table struct {
	// measure: add only widens the columns; out: add writes the line at
	// once (after a measuring pass); otherwise add keeps the row for write.
	measure bool
	out     *bufio.Writer
	err     error
	widths  []int
	align   []byte
	rows    [][]string
}

func (t *table) add(cells ...string) {
	for i, c := range cells {
		cells[i] = textsafe.Line(c)
	}
	switch {
	case t.measure:
		t.widen(cells)
	case t.out != nil:
		if t.err == nil {
			t.err = t.line(t.out, cells)
		}
	default:
		t.rows = append(t.rows, cells)
	}
}

func (t *table) widen(cells []string) {
	if t.widths == nil {
		t.widths = make([]int, len(t.align))
	}
	for i, c := range cells {
		t.widths[i] = max(t.widths[i], utf8.RuneCountInString(c))
	}
}

// write writes the rows kept by add.
func (t *table) write(w io.Writer) error {
	for _, r := range t.rows {
		t.widen(r)
	}
	for _, r := range t.rows {
		if err := t.line(w, r); err != nil {
			return err
		}
	}
	return nil
}

// line writes one row padded to the column widths.
func (t *table) line(w io.Writer, r []string) error {
	var b strings.Builder
	for i, c := range r {
		pad := strings.Repeat(" ", max(t.widths[i]-utf8.RuneCountInString(c), 0))
		if i > 0 {
			b.WriteString("  ")
		}
		if t.align[i] == 'r' {
			b.WriteString(pad + c)
		} else {
			b.WriteString(c + pad)
		}
	}
	_, err := io.WriteString(w, strings.TrimRight(b.String(), " ")+"\n")
	return err
}

// prefix returns the first n segments of p.
func prefix(p engine.Path, n int) engine.Path {
	for p.Len() > n {
		p = p.Parent()
	}
	return p
}

// writeMemory writes the training-memory estimate and the fit answers, or,
// for a stack with errors, that there is no estimate.
func writeMemory(w io.Writer, an *engine.Analysis) {
	m, t := &an.Memory, an.Training
	est := " — estimate"
	if !m.Estimated {
		est = ""
	}
	fmt.Fprintf(w, "\ntraining memory per GPU%s · batch %d on %d GPU%s (micro-batch %d) · %s · %s",
		est, max(t.Batch, 1), max(t.GPUs, 1), plS(max(t.GPUs, 1)), m.MicroBatch, t.Precision, t.Optimizer)
	if t.Shard != engine.ShardNone {
		fmt.Fprintf(w, " · %s sharded", t.Shard)
	}
	if t.Checkpoint > 0 {
		fmt.Fprintf(w, " · checkpoint every %d", t.Checkpoint)
	}
	fmt.Fprintln(w)
	if !m.Estimated {
		fix := "; fix them (listed below) for an estimate"
		if m.StackErrors == 0 {
			fix = "" // the reason says the fix (an empty stack)
		}
		fmt.Fprintf(w, "  %s%s\n", NotEstimated(m), fix)
		return
	}
	tb := table{align: []byte("lrr")}
	for _, c := range m.Categories() {
		share := ""
		if m.Total > 0 {
			share = fmt.Sprintf("%.0f%%", 100*float64(c.Bytes)/float64(m.Total))
		}
		tb.add("  "+c.Name, engine.FormatBytes(c.Bytes), share)
	}
	tb.add("  total", engine.FormatBytes(m.Total), "")
	tb.write(w)
	fmt.Fprintf(w, "  step peak: %s — per sample %s kept for backward + %s of live outputs and gradients (in workspace)\n",
		m.PeakWhere(an.Result), engine.FormatBytes(m.ActPerSample), engine.FormatBytes(m.ScratchPerSample))
	if m.Budget > 0 {
		verdict := "fits"
		if !m.Fits {
			verdict = "does NOT fit"
		}
		fmt.Fprintf(w, "  budget %s, %s (%s) kept free → %s; %s left\n", engine.FormatBytes(m.Budget),
			engine.FormatBytes(m.Reserve), engine.FormatShare(t.HeadroomShare()), verdict, engine.FormatBytes(m.Budget-m.Reserve-m.Total))
	}
	fmt.Fprintf(w, "  inference alone: %s (weights and the largest set of live activations)\n", engine.FormatBytes(m.Inference))
	if f := an.Fit; f.HasBudget {
		fmt.Fprintf(w, "  fits at most: batch %s (%s limit, peak in %s) · width ×%.2f (%s limit) · ", answer(f.MaxBatch), f.BatchLimit, m.PeakWhere(an.Result), f.MaxWidth, orDash(f.WidthLimit))
		if f.MinGPUs > 0 {
			fmt.Fprintf(w, "fewest GPUs %d\n", f.MinGPUs)
		} else {
			fmt.Fprintf(w, "no GPU count up to 65536 fits (%s limit)\n", f.GPUsLimit)
		}
	}
	fmt.Fprintf(w, "  %s Sizes in binary units (1 GiB = 1024³ bytes).\n", Caution)
}

// NotEstimated is the line every report gives instead of a memory verdict
// when the stack has errors or no layers: "memory not estimated: the stack
// has 2 error(s)".
func NotEstimated(m *engine.Memory) string {
	return "memory not estimated: " + m.Reason()
}

func plS(n int64) string {
	if n == 1 {
		return ""
	}
	return "s"
}

func answer(n int64) string {
	if n == 0 {
		return "none"
	}
	return engine.GroupDigits(n)
}

func orDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
}
