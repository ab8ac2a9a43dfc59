package editor

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	"github.com/charmbracelet/lipgloss"
	"github.com/charmbracelet/x/ansi"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/editor/confirm"
	"stackfit/ui/editor/form"
	"stackfit/ui/editor/helpscreen"
	"stackfit/ui/editor/picker"
	"stackfit/ui/editor/prompt"
)

// View draws the screen from state computed in Update; it renders only the
// visible rows, so its cost does not grow with the stack.
func (m *Model) View() string {
	if m.quitting {
		return ""
	}
	lay := m.layout()
	if lay.tooSmall {
		note := fmt.Sprintf("stackfit needs a %d×%d window; this one is %d×%d.\nEnlarge it, or press %s to quit.", minWidth, minHeight, m.width, m.height, textsafe.Line(m.keys.Quit.Help().Key))
		return lipgloss.Place(max(m.width, 1), max(m.height, 1), lipgloss.Center, lipgloss.Center, note)
	}
	if h, ok := m.overlay.(*helpscreen.Model); ok {
		return h.View(m.width, m.height)
	}
	fr := m.frame()
	var b strings.Builder
	b.WriteString(m.titleLine())
	b.WriteByte('\n')
	switch o := m.overlay.(type) {
	case *chart:
		b.WriteString(fr.chartView(lay.listH + 2 + lay.detailH))
	case *fitMapView:
		b.WriteString(fr.fitMapView(o, lay.listH+2+lay.detailH))
	default:
		b.WriteString(m.tree.header(fr.drawing, lay))
		b.WriteByte('\n')
		switch o := o.(type) {
		case *form.Model:
			b.WriteString(o.View(m.width, lay.listH))
		case *picker.Model:
			b.WriteString(o.View(m.width, lay.listH))
		default:
			b.WriteString(m.tree.view(fr.drawing, lay, m.emptyText()))
		}
		b.WriteString(m.rule("details"))
		b.WriteByte('\n')
		b.WriteString(fr.detailView(lay))
	}
	title := "memory per GPU — estimate"
	if timeTexts(fr.shownTime()) != nil && !fr.previewBlocked {
		title = "memory per GPU and step time — estimates"
	}
	b.WriteString(m.rule(title))
	b.WriteByte('\n')
	status := m.statusLines()
	b.WriteString(fr.footer(status[:len(status)-1]))
	b.WriteString(m.bottomView(status[len(status)-1]))
	return b.String()
}

// statusLines is the status message wrapped to the window: its last line
// goes on the status line, any before it over the footer's last lines, so
// a long message (a keys-file problem at start, say) is read whole rather
// than cut — until the next key, when it shrinks to its line.
func (m *Model) statusLines() []string {
	status := textsafe.Line(m.status) // messages quote names, file names and errors
	lines := []string{status}
	if m.statusNew && cells.Width(status) > m.width {
		lines = strings.Split(ansi.Wrap(status, m.width, " "), "\n")
		if len(lines) > 3 {
			lines = append(lines[:2], cells.Fit(strings.Join(lines[2:], " "), m.width))
		}
	}
	if m.statusK == statusError {
		for i := range lines {
			lines[i] = m.st.Error.Render(lines[i])
		}
	}
	return lines
}

// emptyText is what the stack view shows while the stack is empty.
func (m *Model) emptyText() string {
	if p, ok := m.overlay.(*prompt.Model); ok && p.Tag() == promptInput {
		return "new stack — first give the input shape on the bottom line and press enter; then a adds a layer"
	}
	return "empty stack — press a to add a layer, or : to type one (e.g. conv 32 k3 p1)"
}

func (m *Model) rule(title string) string {
	t := "── " + title + " "
	return m.st.Dim.Render(t + strings.Repeat("─", max(m.width-cells.Width(t), 0)))
}

// frame is what the screen below the stack view is drawn from, gathered
// once per View: the figures, the selection, the open preview, the window
// and the styles.
type frame struct {
	drawing
	keys           keymap.KeyMap
	stack          *engine.Stack // the stack being edited
	fit            engine.Fit
	cur            *item
	preview        *engine.Analysis // a form's or prompt's preview, or nil
	previewBlocked bool
	widthState     widthState
	detailOff      int          // lines the details panel is scrolled
	time           *engine.Time // the stack's time estimate; nil without a GPU model
}

// frame gathers what the panels draw from.
func (m *Model) frame() *frame {
	return &frame{drawing: m.drawing(), keys: m.keys, stack: m.stack, fit: m.nums.fit, cur: m.tree.current(),
		preview: m.preview, previewBlocked: m.previewBlocked, widthState: m.nums.widthState, detailOff: m.detailOffset(), time: m.timeShown()}
}

// timeShown is the stack's time estimate, nil when the training names no
// GPU model.
func (m *Model) timeShown() *engine.Time {
	if _, ok := m.stack.Training.Device(); !ok {
		return nil
	}
	return &m.nums.time
}

// shownTime is the time estimate to show beside the shown numbers: the
// preview's while one is open; nil when there is none.
func (fr *frame) shownTime() *engine.Time {
	if fr.preview != nil {
		return fr.preview.Time
	}
	return fr.time
}

// shown returns the numbers to show: the preview while a form or prompt
// has one, else the stack's.
func (fr *frame) shown() (*engine.Result, *engine.Memory, engine.Fit, *engine.Stack) {
	if fr.preview != nil {
		return fr.preview.Result, &fr.preview.Memory, fr.preview.Fit, fr.preview.Stack
	}
	return fr.res, fr.mem, fr.fit, fr.stack
}

// titleLine is the top line: the stack's name, its input and output, and
// the file. The name and the file name are shown terminal-safe, as is every
// text from the stack or the user that the editor draws (textsafe.Line).
func (m *Model) titleLine() string {
	name := textsafe.Line(m.stack.Name)
	if name == "" {
		name = "untitled"
	}
	file := textsafe.Line(m.file.path)
	if file == "" {
		file = "not saved yet"
	}
	mark := ""
	if m.file.dirty {
		mark = m.st.Modified.Render(" ●")
	}
	out := "?"
	if m.nums.res.Errors == 0 && len(m.nums.res.Rows) > 0 {
		out = m.nums.res.Output.String()
	}
	left := m.st.Title.Render("stackfit") + " │ " + name + mark + " │ " + m.stack.Input.String() + " → " + out
	r := m.st.Dim.Render(file)
	if m.file.unprotected {
		r = m.st.Error.Render("⚠ no recovery copy") + " " + r
	}
	gap := m.width - cells.Width(left) - cells.Width(r)
	if gap < 1 {
		return cells.Fit(left, m.width)
	}
	return left + strings.Repeat(" ", gap) + r
}

// bottomView is the status line and the hint bar, or the open prompt, or
// the open question and its answers; status is the status line's text.
func (m *Model) bottomView(status string) string {
	switch o := m.overlay.(type) {
	case *prompt.Model:
		return o.View(m.width)
	case *confirm.Model:
		return o.View(m.width) + "\n" + m.hintBar(o.Keys.ShortHelp(), nil)
	}
	var hints, keep []key.Binding
	switch o := m.overlay.(type) {
	case *form.Model:
		hints = o.KeyMap.ShortHelp()
	case *picker.Model:
		hints = o.Keys.ShortHelp()
	case *chart:
		hints = []key.Binding{m.keys.ChartView, m.keys.Cancel}
	case *fitMapView:
		hints = o.keys.ShortHelp()
	default:
		hints, keep = m.keys.ShortHelp(), []key.Binding{m.keys.Save, m.keys.ShowHelp, m.keys.Quit}
	}
	return cells.Fit(status, m.width) + "\n" + m.hintBar(hints, keep)
}

// hintBar draws bindings on one line of the window's width. The bindings
// in keep are always shown, at the end; the others in their order, as
// many as fit, the least important (the last) left out first.
func (m *Model) hintBar(bindings, keep []key.Binding) string {
	const sep = " · "
	sepW := cells.Width(sep)
	// Widths from the plain text: styles are rendered only for the hints
	// that are shown, once.
	// Labels come from the keys file: escaped here too (textsafe.Line).
	width := func(b key.Binding) int {
		return cells.Width(textsafe.Line(b.Help().Key)) + 1 + cells.Width(textsafe.Line(b.Help().Desc)) + sepW
	}
	part := func(b key.Binding) string {
		return m.st.Label.Render(textsafe.Line(b.Help().Key)) + " " + m.st.Help.Render(textsafe.Line(b.Help().Desc))
	}
	isKept := func(b key.Binding) bool {
		for _, k := range keep {
			if k.Help() == b.Help() {
				return true
			}
		}
		return false
	}
	used := 0
	var tail []key.Binding
	for _, k := range keep {
		if k.Enabled() {
			tail = append(tail, k)
			used += width(k)
		}
	}
	var head []key.Binding
	more := false
	for _, b := range bindings {
		if !b.Enabled() || isKept(b) {
			continue
		}
		if used+width(b) > m.width-2 { // room for the "…" that says some are left out
			more = true
			break
		}
		head = append(head, b)
		used += width(b)
	}
	join := func(bs []key.Binding) string {
		parts := make([]string, len(bs))
		for i, b := range bs {
			parts[i] = part(b)
		}
		return strings.Join(parts, m.st.Help.Render(sep))
	}
	line := join(append(head, tail...))
	if more {
		line = join(head)
		if len(head) > 0 {
			line += m.st.Help.Render(" …")
		}
		if len(tail) > 0 {
			line += m.st.Help.Render(sep) + join(tail)
		}
	}
	return cells.Fit(line, m.width)
}
