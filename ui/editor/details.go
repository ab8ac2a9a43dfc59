package editor

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/x/ansi"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/ui/editor/cells"
)

// detailView explains the selected item in the panel's lines: the
// heading, then its errors and warnings (never crowded out), then the
// arithmetic, each wrapped to the window. Longer content scrolls (from
// fr.detailOff); what does not fit is counted on the first and last line.
func (fr *frame) detailView(lay layout) string {
	lines := fr.detailWrapped()
	h := lay.detailH
	off := min(fr.detailOff, maxDetailOff(len(lines), h))
	if off > 0 && h > 1 {
		above := off + 1
		lines = append([]string{fr.st.Dim.Render(firstFit(fr.width,
			fmt.Sprintf("… %d line%s above: %s scrolls up", above, plural(above), fr.keys.DetailsUp.Help().Key),
			fmt.Sprintf("… %d above", above)))}, lines[above:]...)
	}
	if n := len(lines); n > h {
		more := n - h + 1
		lines = append(lines[:h-1], fr.st.Dim.Render(firstFit(fr.width,
			fmt.Sprintf("… %d more line%s: %s scrolls, a taller window shows them, or stackfit report", more, plural(more), fr.keys.DetailsDown.Help().Key),
			fmt.Sprintf("… %d more (%s scrolls)", more, fr.keys.DetailsDown.Help().Key))))
	}
	return cells.Block(lines, h, fr.width)
}

// detailWrapped is the panel's content wrapped to the window.
func (fr *frame) detailWrapped() []string {
	var lines []string
	for _, l := range fr.detailLines() {
		lines = append(lines, strings.Split(ansi.Wrap(l, fr.width, " "), "\n")...)
	}
	return lines
}

// maxDetailOff is the furthest the panel scrolls: n lines in h, the last
// screen showing the end with one line saying what is above.
func maxDetailOff(n, h int) int {
	if n <= h || h < 2 {
		return 0
	}
	return n - h
}

func (fr *frame) detailLines() []string {
	res, mem, _, _ := fr.shown()
	it := fr.cur
	if it == nil {
		return []string{fr.st.Dim.Render("no layer selected")}
	}
	row, last := it.first, it.last
	body := it.gen == nil && engine.SpecOf(it.layer.Kind).Body
	if fr.preview != nil && it.gen == nil {
		row = findRow(res, fr.stack.ItemPath(it.addr))
		last = row
		if body {
			last = lastRow(res, fr.stack.ItemPath(it.addr), row)
		}
	}
	if row < 0 || row >= len(res.Rows) {
		return []string{"no numbers for this layer yet"}
	}
	r := &res.Rows[row]
	where := r.Path.String()
	what := engine.Summary(it.layer)
	switch {
	case it.gen != nil && it.gen.repeat > 0:
		where, what = fr.stack.ItemPath(it.addr).String(), fmt.Sprintf("repeat %d of %d of %s", it.gen.repeat, it.gen.of, engine.Summary(it.layer))
	case it.gen != nil:
		what = engine.RowSummary(r) + " · made by its block (" + r.Role.String() + "); edit the block or its first repeat"
	case body:
		where = fr.stack.ItemPath(it.addr).String()
	}
	head := where + " · " + what
	if fr.preview != nil {
		head = "preview · " + head
	}
	if r.Status == engine.StatusOK {
		out := r.Out
		if last > row && last < len(res.Rows) {
			if lr := &res.Rows[last]; lr.Status == engine.StatusOK {
				out = lr.Out // a block, a repeat or a gate: what its last row gives
			}
		}
		head += fmt.Sprintf(" · %s → %s", r.In, out)
	}
	out := []string{fr.st.Label.Render(textsafe.Line(head))}
	for i := row; i <= last && i < len(res.Rows); i++ {
		for _, d := range res.DiagsFor(i) {
			st := fr.st.Note
			switch d.Severity {
			case engine.SevError:
				st = fr.st.Error
			case engine.SevWarning:
				st = fr.st.Warning
			}
			out = append(out, st.Render(d.Severity.String()+" "+res.Rows[i].Path.String()+": "+textsafe.Line(d.Message())))
		}
	}
	if mem.Estimated && mem.PeakRow >= row && mem.PeakRow <= last {
		out = append(out, fr.st.Warning.Render(fmt.Sprintf("the training step's activation memory peaks here, in %s: %s per sample (%s kept for backward, %s live outputs and gradients)",
			mem.PeakWhere(res), engine.FormatBytes(mem.PeakPerSample), engine.FormatBytes(mem.ActPerSample), engine.FormatBytes(mem.ScratchPerSample))))
	}
	if last > row || body {
		span := *it
		span.first, span.last = row, last
		return append(out, fr.blockLines(&span, res, mem)...)
	}
	for _, l := range res.Explain(row) {
		out = append(out, textsafe.Line(l)) // a merge's explanation quotes its source
	}
	if row < len(mem.Rows) && mem.Activations > 0 {
		if b := mem.Rows[row]; b > 0 {
			out = append(out, fmt.Sprintf("keeps %s for the backward pass at micro-batch %d (%.1f%% of %s activations)",
				engine.FormatBytes(b), mem.MicroBatch, 100*float64(b)/float64(mem.Activations), engine.FormatBytes(mem.Activations)))
		} else {
			out = append(out, "keeps nothing new for the backward pass (what it needs is counted at the layer that made it)")
		}
	}
	return out
}

// lastRow is the last row inside item path p, from row first on.
func lastRow(r *engine.Result, p engine.Path, first int) int {
	last := first
	for k := first + 1; k < len(r.Rows) && r.Rows[k].Path.HasPrefix(p); k++ {
		last = k
	}
	return last
}

func (fr *frame) blockLines(it *item, res *engine.Result, mem *engine.Memory) []string {
	l := it.layer
	if l.Kind == engine.KindBranch && len(l.Body) == 0 && l.From != "" {
		return []string{fmt.Sprintf("an empty branch: the output of %q joins unchanged", l.From)}
	}
	if l.Kind == engine.KindBranch && len(l.Body) == 0 {
		return []string{"an empty branch: the fork's input (or its share of the channels) joins unchanged"}
	}
	if it.first < 0 {
		return nil
	}
	params, macs, act := itemTotals(it, res, mem)
	totals := fmt.Sprintf("params %s · MACs %s per sample · keeps %s for backward", engine.GroupDigits(params), engine.FormatCount(macs), engine.FormatBytes(act))
	if g := it.gen; g != nil && g.repeat > 0 {
		stride := "its strides count as 1 (a later repeat)"
		if l.AllStrides {
			stride = "its strides apply (strides: all)"
		}
		return []string{fmt.Sprintf("repeat %d of %d: the layers of the first repeat again, rows %s to %s; %s — space shows its rows",
			g.repeat, g.of, res.Rows[it.first].Path, res.Rows[it.last].Path, stride), totals}
	}
	switch l.Kind {
	case engine.KindFork:
		how := "each reads the whole map"
		if l.Split {
			how = fmt.Sprintf("each reads 1/%d of the channels", max(len(l.Body), 1))
		}
		join := "joined along the channels"
		if l.JoinAdd {
			join = "added element by element"
		}
		return []string{
			fmt.Sprintf("%d branch%s (%s), %s → rows %s to %s",
				len(l.Body), map[bool]string{true: "", false: "es"}[len(l.Body) == 1], how, join, res.Rows[it.first].Path, res.Rows[it.last].Path),
			totals,
		}
	case engine.KindBranch:
		from := ""
		if l.From != "" {
			from = fmt.Sprintf(" from the output of %q", l.From)
		}
		return []string{
			fmt.Sprintf("branch %d of its fork%s: %d layer%s → rows %s to %s", it.addr[len(it.addr)-1]+1, from,
				len(l.Body), plural(len(l.Body)), res.Rows[it.first].Path, res.Rows[it.last].Path),
			totals,
		}
	}
	if l.Kind == engine.KindGate {
		return []string{
			fmt.Sprintf("%d layer%s compute a C×1×1 gate from the map, then the map is multiplied by it channel by channel → rows %s to %s",
				len(l.Body), plural(len(l.Body)), res.Rows[it.first].Path, res.Rows[it.last].Path),
			totals,
		}
	}
	if l.Unit != "" {
		rep := ""
		if l.Repeat > 1 {
			rep = fmt.Sprintf(", %d times (later ones with stride 1)", l.Repeat)
		}
		return []string{
			fmt.Sprintf("a use of unit %s: its %d layer%s%s → rows %s to %s; enter edits its arguments, an edit of its rows edits the unit",
				l.Unit, len(l.Body), plural(len(l.Body)), rep, res.Rows[it.first].Path, res.Rows[it.last].Path),
			totals,
		}
	}
	return []string{
		fmt.Sprintf("%d repeat%s of %d layer%s → rows %s to %s; later repeats run with stride 1%s",
			max(l.Repeat, 1), plural(int(max(l.Repeat, 1))), len(l.Body), plural(len(l.Body)),
			res.Rows[it.first].Path, res.Rows[it.last].Path, map[bool]string{true: " (strides: all keeps them)", false: ""}[l.AllStrides]),
		totals,
	}
}

func findRow(r *engine.Result, p engine.Path) int {
	for i := range r.Rows {
		if r.Rows[i].Path == p {
			return i
		}
	}
	for i := range r.Rows { // a block: its first row
		if r.Rows[i].Path.HasPrefix(p) {
			return i
		}
	}
	return -1
}
