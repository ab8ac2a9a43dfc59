package editor

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/ui/editor/cells"
	"stackfit/ui/styles"
)

// side column widths.
const (
	colOut, colCh, colParams, colAct, colBar, colMACs, colRF, colDelta = 9, 5, 7, 9, 5, 7, 7, 8
)

func sideWidth(c sideCols) int {
	w := colOut + 1 + colCh + 1 + colParams
	if c.wide {
		w += 1 + colMACs + 1 + colRF
	}
	if c.act {
		w += 1 + colAct
	}
	if c.bar {
		w += 1 + colBar
	}
	if c.delta {
		w += 1 + colDelta
	}
	return w
}

// counts are the stack's sizes for the header line, counted once per
// change: the layers written in the file, and the blocks, gates and forks
// holding them (a fork's branches belong to it).
type counts struct {
	layers, blocks, gates, forks int
}

func countItems(ls []engine.Layer, c *counts) {
	for i := range ls {
		switch ls[i].Kind {
		case engine.KindBlock:
			c.blocks++
		case engine.KindGate:
			c.gates++
		case engine.KindFork:
			c.forks++
		case engine.KindBranch:
		default:
			c.layers++
		}
		countItems(ls[i].Body, c)
	}
}

// many writes "1 layer" or "3 layers" with the digits grouped.
func many(n int, one, more string) string {
	if n == 1 {
		return "1 " + one
	}
	return engine.GroupDigits(int64(n)) + " " + more
}

// drawing is what the stack view's lines are drawn from, gathered once
// per frame: the figures, the baseline and the styles.
type drawing struct {
	st       styles.Styles
	res      *engine.Result
	mem      *engine.Memory
	cumAct   []int64
	cumTime  []float64 // layer seconds of rows 0..i, when the bar shows time
	baseline *baseline
	width    int
}

// drawing gathers what the stack view draws from.
func (m *Model) drawing() drawing {
	d := drawing{st: m.st, res: &m.nums.res, mem: &m.nums.mem, cumAct: m.nums.cumAct, baseline: m.baseline, width: m.width}
	if m.shareTime && m.nums.timed {
		d.cumTime = m.nums.cumTime
	}
	return d
}

// header is the line above the stack view: the counts and the side
// column's headings.
func (t *stackTree) header(d drawing, lay layout) string {
	c := t.counts
	left := "  " + many(c.layers, "layer", "layers")
	for _, k := range []struct {
		n         int
		one, more string
	}{{c.blocks, "block", "blocks"}, {c.gates, "gate", "gates"}, {c.forks, "fork", "forks"}} {
		if k.n > 0 {
			left += ", " + many(k.n, k.one, k.more)
		}
	}
	left += " · " + many(len(d.res.Rows), "row", "rows")
	if t.anchor >= 0 {
		left += " · range marked ┃"
	}
	cols := []string{cells.Right("h×w", colOut), cells.Right("ch", colCh), cells.Right("params", colParams)}
	if lay.cols.wide {
		cols = append(cols, cells.Right("MACs", colMACs), cells.Right("rf", colRF))
	}
	if lay.cols.act {
		cols = append(cols, cells.Right("Σ act", colAct))
	}
	if lay.cols.bar {
		name := "share"
		if d.cumTime != nil {
			name = "time"
		}
		cols = append(cols, cells.Fit(name, colBar))
	}
	if lay.cols.delta {
		cols = append(cols, cells.Right("Δ params", colDelta))
	}
	return d.st.Dim.Render(cells.Fit(left, lay.listW) + " " + strings.Join(cols, " "))
}

// view draws the visible lines of the stack view; empty is what an empty
// stack shows.
func (t *stackTree) view(d drawing, lay layout, empty string) string {
	var b strings.Builder
	if len(t.items) == 0 {
		b.WriteString(lipgloss.Place(d.width, lay.listH, lipgloss.Center, lipgloss.Center, d.st.Dim.Render(ansi.Wrap(empty, max(d.width-4, 20), " "))))
		b.WriteByte('\n')
		return b.String()
	}
	lo, hi := t.anchor, t.cursor
	if lo > hi {
		lo, hi = hi, lo
	}
	for i := t.offset; i < t.offset+lay.listH; i++ {
		if i >= len(t.items) {
			b.WriteString(strings.Repeat(" ", d.width))
			b.WriteByte('\n')
			continue
		}
		inRange := t.anchor >= 0 && i >= lo && i <= hi
		line := t.line(d, &t.items[i], lay, i == t.cursor, inRange)
		switch {
		case i == t.cursor:
			line = d.st.Cursor.Render(ansi.Strip(line))
		case inRange:
			line = d.st.Range.Render(ansi.Strip(line))
		}
		b.WriteString(line)
		b.WriteByte('\n')
	}
	return b.String()
}

// mark returns the worst diagnostic of the item's rows: ✗ error, ! warning.
func (d drawing) mark(it *item) string {
	if it.first < 0 {
		return " "
	}
	mk := " "
	for i := it.first; i <= it.last; i++ {
		for _, dg := range d.res.DiagsFor(i) {
			switch dg.Severity {
			case engine.SevError:
				return d.st.Error.Render("✗")
			case engine.SevWarning:
				mk = d.st.Warning.Render("!")
			}
		}
		if d.res.Rows[i].Status == engine.StatusUnresolved && mk == " " {
			mk = d.st.Dim.Render("·")
		}
	}
	return mk
}

// itemLine draws one line: the cursor (▶) or range (┃) mark, so both show
// without colour, the worst diagnostic, the fold mark, the number and the
// text, then the side column.
func (t *stackTree) line(d drawing, it *item, lay layout, selected, inRange bool) string {
	cur := " "
	switch {
	case selected:
		cur = "▶"
	case inRange:
		cur = "┃"
	}
	var fold, num, label string
	switch g := it.gen; {
	case g != nil && g.repeat > 0:
		fold = "▸ "
		if t.opened[g.key] {
			fold = "▾ "
		}
		num = cells.Right("", t.numWidth)
		label = fmt.Sprintf("repeat %d of %d", g.repeat, g.of)
		if it.first >= 0 {
			label += " · rows " + d.res.Rows[it.first].Path.String() + "–" + d.res.Rows[it.last].Path.String()
		}
	case g != nil:
		fold = "· "
		row := &d.res.Rows[it.first]
		num = cells.Right("", t.numWidth)
		label = row.Path.String() + " " + textsafe.Line(engine.RowSummary(row))
	default:
		l := it.layer
		fold = "  "
		if engine.SpecOf(l.Kind).Body {
			fold = "▾ "
			if t.folded[it.addr.key()] {
				fold = "▸ "
			}
		}
		label = engine.Summary(l)
		if l.Kind == engine.KindBranch && l.From != "" {
			label += " from " + l.From
		}
		if l.Kind == engine.KindBranch && len(l.Body) == 0 {
			label += " · empty: the map itself"
		}
		if l.Name != "" {
			label += " [" + l.Name + "]"
		}
		label = textsafe.Line(label) // the name, and a merge's source in the summary
		num = cells.Right(fmt.Sprintf("%d", it.addr[len(it.addr)-1]+1), t.numWidth)
	}
	// Plain text, with style only where it carries meaning (marks, block
	// headers): lipgloss rendering is the costliest part of a frame.
	left := cur + d.mark(it) + " " + strings.Repeat("  ", it.depth) + fold + num + " "
	line := cells.Fit(left+label, lay.listW)
	switch {
	case selected:
	case it.gen != nil:
		line = d.st.Dim.Render(line)
	case engine.SpecOf(it.layer.Kind).Body:
		line = d.st.Block.Render(line)
	}
	return line + " " + d.side(it, lay)
}

// side draws the numbers beside an item.
func (d drawing) side(it *item, lay layout) string {
	blank := func(w int) string { return strings.Repeat(" ", w) }
	if it.first < 0 || it.last >= len(d.res.Rows) {
		return blank(lay.sideW)
	}
	last := &d.res.Rows[it.last]
	if last.Status != engine.StatusOK {
		return cells.Fit(cells.Right(last.Status.String(), colOut+1+colCh), lay.sideW)
	}
	params, macs, act := itemTotals(it, d.res, d.mem)
	cols := []string{
		cells.Right(compactNumber(fmt.Sprintf("%d×%d", last.Out.H, last.Out.W), colOut, last.Out.H, last.Out.W), colOut),
		cells.Right(compactNumber(fmt.Sprint(last.Out.C), colCh, last.Out.C), colCh),
		cells.Right(engine.FormatCount(params), colParams),
	}
	if lay.cols.wide {
		cols = append(cols, cells.Right(engine.FormatCount(macs), colMACs), cells.Right(rfText(last.RF, colRF), colRF))
	}
	if lay.cols.act {
		cum := int64(0)
		if it.last < len(d.cumAct) {
			cum = d.cumAct[it.last]
		}
		cols = append(cols, cells.Right(engine.FormatBytes(cum), colAct))
	}
	if lay.cols.bar {
		part, all := float64(act), 0.0
		if n := len(d.cumAct); n > 0 {
			all = float64(d.cumAct[n-1])
		}
		if c := d.cumTime; c != nil {
			part, all = 0, 0
			if n := len(c); n > 0 && it.last < n {
				all = c[n-1]
				part = c[it.last]
				if it.first > 0 {
					part -= c[it.first-1]
				}
			}
		}
		cols = append(cols, " "+bar(part, all, colBar-1))
	}
	if lay.cols.delta {
		delta := ""
		if it.gen == nil {
			delta = d.baseline.delta(it, params)
		}
		cols = append(cols, d.st.Delta.Render(cells.Right(delta, colDelta)))
	}
	return strings.Join(cols, " ")
}

// compactNumber returns s when it fits in w cells, else the values in
// short form (16.8M, 2.10M×2.10M), so no figure is cut.
func compactNumber(s string, w int, vals ...int64) string {
	if len(s) <= w {
		return s
	}
	parts := make([]string, len(vals))
	for i, v := range vals {
		parts[i] = engine.FormatCount(v)
	}
	return strings.Join(parts, "×")
}

// rfText writes a receptive field in w cells at most: exact when it fits,
// else in short form.
func rfText(p engine.FPair, w int) string {
	s := fmt.Sprintf("%g", p.H)
	if p.H != p.W {
		s = fmt.Sprintf("%g×%g", p.H, p.W)
	}
	if len(s) <= w && !strings.ContainsAny(s, "e") {
		return s
	}
	if p.H == p.W {
		return engine.FormatCount(int64(p.H))
	}
	return engine.FormatCount(int64(p.H)) + "×" + engine.FormatCount(int64(p.W))
}

// bar draws part/whole as a bar of w cells with eighth-cell precision.
func bar(part, whole float64, w int) string {
	if whole <= 0 || part <= 0 {
		return strings.Repeat(" ", w)
	}
	eighths := int(float64(part)/float64(whole)*float64(w*8) + 0.5)
	eighths = max(min(eighths, w*8), 1)
	glyphs := []string{"", "▏", "▎", "▍", "▌", "▋", "▊", "▉"}
	s := strings.Repeat("█", eighths/8) + glyphs[eighths%8]
	return cells.Fit(s, w)
}
