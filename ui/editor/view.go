package editor

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// View draws the screen from state computed in Update; it renders only the
// visible rows, so its cost does not grow with the stack.
func (m *Model) View() string {
	if m.quitting {
		return ""
	}
	lay := m.layout()
	if lay.tooSmall {
		note := fmt.Sprintf("stackfit needs a %d×%d window; this one is %d×%d.\nEnlarge it, or press q to quit.", minWidth, minHeight, m.width, m.height)
		return lipgloss.Place(max(m.width, 1), max(m.height, 1), lipgloss.Center, lipgloss.Center, note)
	}
	if m.mode == modeHelp {
		return m.helpView()
	}
	var b strings.Builder
	b.WriteString(m.titleLine())
	b.WriteByte('\n')
	switch m.mode {
	case modeChart:
		b.WriteString(m.chartView(lay.listH + 2 + lay.detailH))
	default:
		b.WriteString(m.headerLine(lay))
		b.WriteByte('\n')
		switch m.mode {
		case modeForm:
			b.WriteString(m.formView(lay))
		case modePicker:
			b.WriteString(m.pickerView(lay))
		default:
			b.WriteString(m.listView(lay))
		}
		b.WriteString(m.rule("details"))
		b.WriteByte('\n')
		b.WriteString(m.detailView(lay))
	}
	b.WriteString(m.rule("memory per GPU — estimate"))
	b.WriteByte('\n')
	b.WriteString(m.footerView())
	b.WriteString(m.bottomView())
	return b.String()
}

// fit pads or cuts s to exactly w cells.
func fit(s string, w int) string {
	if w <= 0 {
		return ""
	}
	n := ansi.StringWidth(s)
	if n > w {
		return ansi.Truncate(s, w, "…")
	}
	return s + strings.Repeat(" ", w-n)
}

// right pads s on the left to w cells.
func right(s string, w int) string {
	n := ansi.StringWidth(s)
	if n >= w {
		return ansi.Truncate(s, w, "")
	}
	return strings.Repeat(" ", w-n) + s
}

func (m *Model) rule(title string) string {
	t := "── " + title + " "
	return m.st.Dim.Render(t + strings.Repeat("─", max(m.width-ansi.StringWidth(t), 0)))
}

// shown returns the numbers to show: the form's preview while a form is
// open, else the stack's.
func (m *Model) shown() (*engine.Result, *engine.Memory, engine.Fit, *engine.Stack) {
	if m.preview != nil {
		return m.preview.Result, &m.preview.Memory, m.preview.Fit, m.preview.Stack
	}
	return &m.res, &m.mem, m.fit, m.stack
}

// titleLine is the top line: the stack's name, its input and output, and
// the file. The name and the file name are shown terminal-safe, as is every
// text from the stack or the user that the editor draws (textsafe.Line).
func (m *Model) titleLine() string {
	name := textsafe.Line(m.stack.Name)
	if name == "" {
		name = "untitled"
	}
	file := textsafe.Line(m.path)
	if file == "" {
		file = "not saved yet"
	}
	mark := ""
	if m.dirty {
		mark = m.st.Modified.Render(" ●")
	}
	out := "?"
	if m.res.Errors == 0 && len(m.res.Rows) > 0 {
		out = m.res.Output.String()
	}
	left := m.st.Title.Render("stackfit") + " │ " + name + mark + " │ " + m.stack.Input.String() + " → " + out
	r := m.st.Dim.Render(file)
	if m.unprotected {
		r = m.st.Error.Render("⚠ no recovery copy") + " " + r
	}
	gap := m.width - ansi.StringWidth(left) - ansi.StringWidth(r)
	if gap < 1 {
		return fit(left, m.width)
	}
	return left + strings.Repeat(" ", gap) + r
}

// side column widths.
const (
	colOut, colCh, colParams, colAct, colBar, colMACs, colRF, colDelta = 9, 5, 7, 9, 5, 7, 7, 8
)

func sideWidth(wide, delta bool) int {
	w := colOut + 1 + colCh + 1 + colParams + 1 + colAct + 1 + colBar
	if wide {
		w += 1 + colMACs + 1 + colRF
	}
	if delta {
		w += 1 + colDelta
	}
	return w
}

func (m *Model) headerLine(lay layout) string {
	left := fmt.Sprintf("  %d layers · %d rows", len(m.items), len(m.res.Rows))
	if m.anchor >= 0 {
		left += " · range marked"
	}
	cols := []string{right("h×w", colOut), right("ch", colCh), right("params", colParams)}
	if lay.wide {
		cols = append(cols, right("MACs", colMACs), right("rf", colRF))
	}
	cols = append(cols, right("Σ act", colAct), fit("share", colBar))
	if m.baseline != nil {
		cols = append(cols, right("Δ params", colDelta))
	}
	return m.st.Dim.Render(fit(left, lay.listW) + " " + strings.Join(cols, " "))
}

// listView draws the visible rows of the stack view.
func (m *Model) listView(lay layout) string {
	var b strings.Builder
	if len(m.items) == 0 {
		msg := "empty stack — press a to add a layer, or : to type one (e.g. conv 32 k3 p1)"
		if m.mode == modePrompt && m.prompt.kind == promptInput {
			msg = "new stack — first give the input shape on the bottom line and press enter; then a adds a layer"
		}
		b.WriteString(lipgloss.Place(m.width, lay.listH, lipgloss.Center, lipgloss.Center, m.st.Dim.Render(msg)))
		b.WriteByte('\n')
		return b.String()
	}
	lo, hi := m.anchor, m.cursor
	if lo > hi {
		lo, hi = hi, lo
	}
	for i := m.offset; i < m.offset+lay.listH; i++ {
		if i >= len(m.items) {
			b.WriteString(strings.Repeat(" ", m.width))
			b.WriteByte('\n')
			continue
		}
		line := m.itemLine(&m.items[i], lay, i == m.cursor)
		switch {
		case i == m.cursor:
			line = m.st.Cursor.Render(ansi.Strip(line))
		case m.anchor >= 0 && i >= lo && i <= hi:
			line = m.st.Range.Render(ansi.Strip(line))
		}
		b.WriteString(line)
		b.WriteByte('\n')
	}
	return b.String()
}

// mark returns the worst diagnostic of the item's rows: ✗ error, ! warning.
func (m *Model) mark(it *item) string {
	if it.first < 0 {
		return " "
	}
	mk := " "
	for i := it.first; i <= it.last; i++ {
		for _, d := range m.res.DiagsFor(i) {
			switch d.Severity {
			case engine.SevError:
				return m.st.Error.Render("✗")
			case engine.SevWarning:
				mk = m.st.Warning.Render("!")
			}
		}
		if m.res.Rows[i].Status == engine.StatusUnresolved && mk == " " {
			mk = m.st.Dim.Render("·")
		}
	}
	return mk
}

func (m *Model) itemLine(it *item, lay layout, selected bool) string {
	l := it.layer
	fold := "  "
	if engine.SpecOf(l.Kind).Body {
		fold = "▾ "
		if m.folded[it.addr.key()] {
			fold = "▸ "
		}
	}
	label := engine.Summary(l)
	if l.Kind == engine.KindBranch && len(l.Body) == 0 {
		label += " · empty: the map itself"
	}
	if l.Name != "" {
		label += " [" + l.Name + "]"
	}
	label = textsafe.Line(label) // the name, and a merge's source in the summary
	num := right(fmt.Sprintf("%d", it.addr[len(it.addr)-1]+1), m.numWidth)
	cur := " "
	if selected {
		cur = "▶"
	}
	// Plain text, with style only where it carries meaning (marks, block
	// headers): lipgloss rendering is the costliest part of a frame.
	left := cur + m.mark(it) + " " + strings.Repeat("  ", it.depth) + fold + num + " "
	line := fit(left+label, lay.listW)
	if engine.SpecOf(l.Kind).Body && !selected {
		line = m.st.Block.Render(line)
	}
	return line + " " + m.sideCells(it, lay)
}

// sideCells draws the numbers beside an item.
func (m *Model) sideCells(it *item, lay layout) string {
	blank := func(w int) string { return strings.Repeat(" ", w) }
	if it.first < 0 || it.last >= len(m.res.Rows) {
		return blank(lay.sideW)
	}
	last := &m.res.Rows[it.last]
	if last.Status != engine.StatusOK {
		txt := right(last.Status.String(), colOut)
		return txt + blank(lay.sideW-colOut)
	}
	params, macs, act := itemTotals(it, &m.res, &m.mem)
	cols := []string{
		right(fmt.Sprintf("%d×%d", last.Out.H, last.Out.W), colOut),
		right(fmt.Sprint(last.Out.C), colCh),
		right(engine.FormatCount(params), colParams),
	}
	if lay.wide {
		cols = append(cols, right(engine.FormatCount(macs), colMACs), right(rfText(last.RF), colRF))
	}
	cum := int64(0)
	if it.last < len(m.cumAct) {
		cum = m.cumAct[it.last]
	}
	var all int64
	if n := len(m.cumAct); n > 0 {
		all = m.cumAct[n-1]
	}
	cols = append(cols, right(engine.FormatBytes(cum), colAct), " "+bar(act, all, colBar-1))
	if m.baseline != nil {
		d := "new"
		if p, ok := m.baseline.rowParams[it.addr.key()]; ok {
			d = signed(params-p, engine.FormatCount)
		}
		cols = append(cols, m.st.Delta.Render(right(d, colDelta)))
	}
	return strings.Join(cols, " ")
}

func rfText(p engine.FPair) string {
	if p.H == p.W {
		return fmt.Sprintf("%g", p.H)
	}
	return fmt.Sprintf("%g×%g", p.H, p.W)
}

// bar draws part/whole as a bar of w cells with eighth-cell precision.
func bar(part, whole int64, w int) string {
	if whole <= 0 || part <= 0 {
		return strings.Repeat(" ", w)
	}
	eighths := int(float64(part)/float64(whole)*float64(w*8) + 0.5)
	eighths = max(min(eighths, w*8), 1)
	glyphs := []string{"", "▏", "▎", "▍", "▌", "▋", "▊", "▉"}
	s := strings.Repeat("█", eighths/8) + glyphs[eighths%8]
	return fit(s, w)
}

// detailView explains the selected item.
func (m *Model) detailView(lay layout) string {
	lines := m.detailLines()
	var b strings.Builder
	for i := 0; i < lay.detailH; i++ {
		s := ""
		if i < len(lines) {
			s = lines[i]
		}
		b.WriteString(fit(s, m.width))
		b.WriteByte('\n')
	}
	return b.String()
}

func (m *Model) detailLines() []string {
	res, mem, _, _ := m.shown()
	it := m.current()
	if it == nil {
		return []string{m.st.Dim.Render("no layer selected")}
	}
	row := it.first
	if m.preview != nil {
		row = findRow(res, m.stack.ItemPath(it.addr))
	}
	if row < 0 || row >= len(res.Rows) {
		return []string{"no numbers for this layer yet"}
	}
	r := &res.Rows[row]
	var out []string
	where := r.Path.String()
	if engine.SpecOf(it.layer.Kind).Body {
		where = m.stack.ItemPath(it.addr).String()
	}
	head := fmt.Sprintf("%s · %s", where, engine.Summary(it.layer))
	if m.preview != nil {
		head = "preview · " + head
	}
	if r.Status == engine.StatusOK {
		out := r.Out
		if engine.SpecOf(it.layer.Kind).Body && it.last >= row && it.last < len(res.Rows) {
			if lr := &res.Rows[it.last]; lr.Status == engine.StatusOK {
				out = lr.Out // a block or gate: what its last row gives
			}
		}
		head += fmt.Sprintf(" · %s → %s", r.In, out)
	}
	out = append(out, m.st.Label.Render(textsafe.Line(head)))
	if engine.SpecOf(it.layer.Kind).Body {
		out = append(out, m.blockLines(it, res, mem)...)
	} else {
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
	}
	last := row
	if engine.SpecOf(it.layer.Kind).Body && m.preview == nil {
		last = it.last
	}
	for i := row; i <= last && i < len(res.Rows); i++ {
		for _, d := range res.DiagsFor(i) {
			st := m.st.Note
			switch d.Severity {
			case engine.SevError:
				st = m.st.Error
			case engine.SevWarning:
				st = m.st.Warning
			}
			out = append(out, st.Render(d.Severity.String()+" "+res.Rows[i].Path.String()+": "+textsafe.Line(d.Message())))
		}
	}
	return out
}

func (m *Model) blockLines(it *item, res *engine.Result, mem *engine.Memory) []string {
	l := it.layer
	if l.Kind == engine.KindBranch && len(l.Body) == 0 {
		return []string{"an empty branch: the fork's input (or its share of the channels) joins unchanged"}
	}
	if it.first < 0 {
		return nil
	}
	params, macs, act := itemTotals(it, res, mem)
	totals := fmt.Sprintf("params %s · MACs %s per sample · keeps %s for backward", engine.GroupDigits(params), engine.FormatCount(macs), engine.FormatBytes(act))
	switch l.Kind {
	case engine.KindFork:
		how := "each reads the whole map"
		if l.Split {
			how = fmt.Sprintf("each reads 1/%d of the channels", max(len(l.Body), 1))
		}
		return []string{
			fmt.Sprintf("%d branch%s (%s), joined along the channels → rows %s to %s",
				len(l.Body), map[bool]string{true: "", false: "es"}[len(l.Body) == 1], how, res.Rows[it.first].Path, res.Rows[it.last].Path),
			totals,
		}
	case engine.KindBranch:
		return []string{
			fmt.Sprintf("branch %d of its fork: %d layer%s → rows %s to %s", it.addr[len(it.addr)-1]+1,
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

// footerView draws totals, the budget gauge and the fit answers.
func (m *Model) footerView() string {
	res, mem, ft, s := m.shown()
	t := s.Training
	var b strings.Builder
	verdict := ""
	if mem.Budget > 0 {
		if mem.Fits {
			verdict = m.st.Good.Render("fits") + " · "
		} else {
			verdict = m.st.Bad.Render("does not fit") + " · "
		}
	}
	budget := " (no budget)"
	if mem.Budget > 0 {
		budget = " / " + compactBytes(mem.Budget)
	}
	var dp, dm, dmem string
	if bl := m.baseline; bl != nil {
		dp = m.st.Delta.Render(" (" + signed(res.Totals.Params-bl.params, engine.FormatCount) + ")")
		dm = m.st.Delta.Render(" (" + signed(res.Totals.MACs-bl.macs, engine.FormatCount) + ")")
		dmem = m.st.Delta.Render(" (" + signed(mem.Total-bl.memory, compactBytes) + ")")
	}
	line := fmt.Sprintf("%smemory %s%s%s · params %s%s · MACs %s%s", verdict,
		compactBytes(mem.Total), dmem, budget, engine.FormatCount(res.Totals.Params), dp,
		engine.FormatCount(res.Totals.MACs), dm)
	b.WriteString(fit(line, m.width))
	b.WriteByte('\n')
	b.WriteString(m.gauge(mem, m.width))
	b.WriteByte('\n')
	b.WriteString(fit(m.legend(mem), m.width))
	b.WriteByte('\n')
	b.WriteString(fit(m.fitLine(ft, max(t.Batch, 1)), m.width))
	b.WriteByte('\n')
	return b.String()
}

// gauge draws the memory categories against the budget (or the total when
// there is none); the reserve kept free shows at the right end.
func (m *Model) gauge(mem *engine.Memory, w int) string {
	scale := mem.Budget
	if scale <= 0 {
		scale = mem.Total
	}
	if scale <= 0 || w < 4 {
		return ""
	}
	inner := w - 2
	var b strings.Builder
	used := 0
	for i, c := range mem.Categories() {
		n := int(float64(c.Bytes)/float64(scale)*float64(inner) + 0.5)
		if c.Bytes > 0 && n == 0 {
			n = 1
		}
		n = min(n, inner-used)
		if n > 0 {
			b.WriteString(m.st.Gauge[i].Render(strings.Repeat(m.st.GaugeGlyph[i], n)))
			used += n
		}
	}
	if mem.Budget > 0 {
		reserve := int(float64(mem.Reserve)/float64(scale)*float64(inner) + 0.5)
		free := inner - used - reserve
		if free > 0 {
			b.WriteString(m.st.Free.Render(strings.Repeat("·", free)))
			used += free
		}
		if n := inner - used; n > 0 {
			b.WriteString(m.st.Reserve.Render(strings.Repeat("╌", n)))
		}
	}
	end := "]"
	if mem.Budget > 0 && !mem.Fits {
		end = m.st.Bad.Render("!")
	}
	return "[" + b.String() + end
}

// legend names the gauge's glyphs with each category's size.
func (m *Model) legend(mem *engine.Memory) string {
	names := [6]string{"weights", "grads", "optim", "act", "work", "cuda"}
	var parts []string
	for i, c := range mem.Categories() {
		parts = append(parts, m.st.Gauge[i].Render(m.st.GaugeGlyph[i])+" "+names[i]+" "+compactBytes(c.Bytes))
	}
	return strings.Join(parts, "  ")
}

// compactBytes writes a size in at most five characters of binary units.
func compactBytes(n int64) string {
	s := engine.FormatBytes(n)
	s = strings.Replace(s, " GiB", "G", 1)
	s = strings.Replace(s, " MiB", "M", 1)
	s = strings.Replace(s, " KiB", "K", 1)
	return strings.Replace(s, " B", "B", 1)
}

// fitLine gives the fit solver's answers.
func (m *Model) fitLine(ft engine.Fit, batch int64) string {
	if !ft.HasBudget {
		return m.st.Dim.Render("set a budget (t) to see the largest batch and width that fit")
	}
	w := "searching…"
	if m.preview != nil {
		w = "after you accept"
	} else if ft.MaxWidth > 0 {
		w = fmt.Sprintf("×%.2f", ft.MaxWidth)
		if !ft.WidthExact {
			w = "over ×32"
		}
	}
	gpus := "none up to 65,536"
	if ft.MinGPUs > 0 {
		gpus = fmt.Sprint(ft.MinGPUs)
	}
	return fmt.Sprintf("batch %d now · fits at most: batch %s (%s run out) · width %s · fewest GPUs %s",
		batch, batchText(ft.MaxBatch), ft.BatchLimit, w, gpus)
}

func batchText(n int64) string {
	if n == 0 {
		return "none"
	}
	return engine.GroupDigits(n)
}

// bottomView is the status line and the help (or the prompt / question).
func (m *Model) bottomView() string {
	h := &m.help
	switch m.mode {
	case modePrompt:
		p := m.prompt
		// The field itself is safe: the text input drops control
		// characters from what it is given or typed.
		line := m.st.Label.Render(textsafe.Line(p.label)+": ") + p.input.view(m.st.Cursor)
		hint := textsafe.Line(p.hint)
		if p.bad {
			hint = m.st.Error.Render(hint)
		} else {
			hint = m.st.Dim.Render(hint)
		}
		return fit(line, m.width) + "\n" + fit(hint, m.width)
	case modeConfirm:
		return fit(m.st.Warning.Render(textsafe.Line(m.confirm.question)), m.width) + "\n" + h.ShortHelpView(m.keys.ConfirmHelp())
	}
	status := textsafe.Line(m.status) // messages quote names, file names and errors
	if m.statusK == statusError {
		status = m.st.Error.Render(status)
	}
	var bindings []key.Binding
	switch m.mode {
	case modeForm:
		bindings = m.keys.FormHelp()
	case modePicker:
		bindings = m.keys.PickerHelp()
	case modeChart:
		bindings = []key.Binding{m.keys.ChartView, m.keys.Cancel}
	default:
		bindings = m.keys.ShortHelp()
	}
	return fit(status, m.width) + "\n" + h.ShortHelpView(bindings)
}
