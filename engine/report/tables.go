package report

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// columns are the per-layer fields of the markdown and CSV reports.
var columns = []string{"path", "layer", "name", "status", "out C", "out H", "out W", "params", "buffers", "MACs", "rf h", "rf w", "act bytes", "step peak"}

// cells returns one row's values as text, plain numbers for CSV.
func cells(an *engine.Analysis, i int) []string {
	r := &an.Result.Rows[i]
	act := int64(0)
	if i < len(an.Memory.Rows) {
		act = an.Memory.Rows[i]
	}
	out := []string{"", "", ""}
	if r.Status == engine.StatusOK {
		out = []string{strconv.FormatInt(r.Out.C, 10), strconv.FormatInt(r.Out.H, 10), strconv.FormatInt(r.Out.W, 10)}
	}
	f := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	peak := "" // the phase, on the row where the step's memory peaks
	if an.Memory.Estimated && an.Memory.PeakRow == i {
		peak = an.Memory.PeakPhase.String()
	}
	return append([]string{r.Path.String(), textsafe.Line(engine.RowSummary(r)), textsafe.Line(r.Layer.Name), r.Status.String()},
		append(out, strconv.FormatInt(r.Params, 10), strconv.FormatInt(r.Buffers, 10), strconv.FormatInt(r.MACs, 10),
			f(r.RF.H), f(r.RF.W), strconv.FormatInt(act, 10), peak)...)
}

// WriteCSV writes one line per layer with a header line; numbers are plain
// integers (bytes for act bytes) so spreadsheets can sum them. Names and
// summaries have their control characters escaped (textsafe.Line), so a
// name can neither break a record nor reach a terminal that shows the file.
func WriteCSV(w io.Writer, an *engine.Analysis) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(columns); err != nil {
		return err
	}
	for i := range an.Result.Rows {
		if err := cw.Write(cells(an, i)); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// mdEscape makes text from the stack safe in a markdown document: control
// characters become visible escapes (textsafe.Line, so no line break can
// end a table row), HTML's <, > and & become character references so no
// tag or entity gets through, and the backslash, the table pipe, brackets
// and backticks are backslash-escaped (CommonMark's escapable
// punctuation) so text can neither leave its table cell nor form a link,
// an image or a code span.
func mdEscape(s string) string {
	s = textsafe.Line(s)
	if !strings.ContainsAny(s, "&<>\\|[]`") {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		switch c := s[i]; c {
		case '&':
			b.WriteString("&amp;")
		case '<':
			b.WriteString("&lt;")
		case '>':
			b.WriteString("&gt;")
		case '\\', '|', '[', ']', '`':
			b.WriteByte('\\')
			b.WriteByte(c)
		default:
			b.WriteByte(c)
		}
	}
	return b.String()
}

// WriteMarkdown writes the report for a design document: a title, the
// layer table, totals, the memory estimate and the diagnostics. It writes
// a row at a time through a buffer, so the report is never held whole.
func WriteMarkdown(w io.Writer, an *engine.Analysis) error {
	s, r, m := an.Stack, an.Result, &an.Memory
	b := bufio.NewWriterSize(w, 64<<10)
	title := s.Name
	if title == "" {
		title = "Stack"
	}
	fmt.Fprintf(b, "## %s\n\n", mdEscape(title))
	fmt.Fprintf(b, "Input %s → output %s · %s parameters · %s MACs per sample.\n\n",
		s.Input, outText(r), engine.GroupDigits(r.Totals.Params), engine.GroupDigits(r.Totals.MACs))
	head := []string{"at", "layer", "out C×H×W", "params", "MACs", "rf", "kept for backward"}
	b.WriteString("| " + strings.Join(head, " | ") + " |\n")
	b.WriteString("|" + strings.Repeat(" --- |", len(head)) + "\n")
	vals := make([]string, 0, len(head))
	for i := range r.Rows {
		row := &r.Rows[i]
		label := mdEscape(engine.RowSummary(row))
		if row.Layer.Name != "" {
			label += " [" + mdEscape(row.Layer.Name) + "]" // stackfit's brackets, the name's escaped
		}
		out := row.Status.String()
		if row.Status == engine.StatusOK {
			out = row.Out.String()
		}
		act := int64(0)
		if i < len(m.Rows) {
			act = m.Rows[i]
		}
		vals = append(vals[:0], row.Path.String(), label, out, engine.GroupDigits(row.Params), engine.FormatCount(row.MACs), fpair(row.RF), engine.FormatBytes(act))
		b.WriteString("|")
		for j, v := range vals {
			if j != 1 { // the label is escaped piece by piece above
				v = mdEscape(v)
			}
			b.WriteString(" " + v + " |")
		}
		if _, err := b.WriteString("\n"); err != nil {
			return err
		}
	}
	t := an.Training
	if !m.Estimated {
		fix := "; fix them (see the diagnostics) for an estimate"
		if m.StackErrors == 0 {
			fix = "" // the reason says the fix (an empty stack)
		}
		fmt.Fprintf(b, "\n**Training memory per GPU** at batch %d on %d GPU(s), %s, %s: %s%s.\n",
			max(t.Batch, 1), max(t.GPUs, 1), t.Precision, t.Optimizer, NotEstimated(m), fix)
		writeDiagnostics(b, r)
		return b.Flush()
	}
	fmt.Fprintf(b, "\n**Training memory per GPU (estimate)** at batch %d on %d GPU(s), %s, %s:\n\n",
		max(t.Batch, 1), max(t.GPUs, 1), t.Precision, t.Optimizer)
	b.WriteString("| category | size |\n| --- | --- |\n")
	for _, c := range m.Categories() {
		fmt.Fprintf(b, "| %s | %s |\n", c.Name, engine.FormatBytes(c.Bytes))
	}
	fmt.Fprintf(b, "| **total** | **%s** |\n\n", engine.FormatBytes(m.Total))
	if m.Estimated {
		fmt.Fprintf(b, "The step's activation memory peaks in %s: per sample %s kept for backward and %s of live outputs and gradients.\n\n",
			m.PeakWhere(r), engine.FormatBytes(m.ActPerSample), engine.FormatBytes(m.ScratchPerSample))
	}
	if m.Budget > 0 {
		verdict := "fits"
		if !m.Fits {
			verdict = "does not fit"
		}
		fmt.Fprintf(b, "Budget %s with %s kept free: %s.", engine.FormatBytes(m.Budget), engine.FormatShare(t.HeadroomShare()), verdict)
		if f := an.Fit; f.HasBudget {
			fmt.Fprintf(b, " Largest batch %s, widest ×%.2f, fewest GPUs %d.", answer(f.MaxBatch), f.MaxWidth, f.MinGPUs)
		}
		b.WriteString("\n\n")
	}
	b.WriteString("_" + Caution + "_\n")
	writeDiagnostics(b, r)
	return b.Flush()
}

// writeDiagnostics writes the markdown report's list of diagnostics.
func writeDiagnostics(b *bufio.Writer, r *engine.Result) {
	if len(r.Diags) > 0 {
		b.WriteString("\n**Diagnostics**\n\n")
		for _, d := range r.Diags {
			fmt.Fprintf(b, "- %s: %s\n", d.Severity, mdEscape(r.Describe(d)))
		}
	}
}

func outText(r *engine.Result) string {
	if r.Errors > 0 || len(r.Rows) == 0 {
		return "unknown"
	}
	return r.Output.String()
}
