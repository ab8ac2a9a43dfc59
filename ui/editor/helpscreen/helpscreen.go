// Package helpscreen is the editor's help: every binding of a key map,
// generated from it, in as many columns as the window holds, followed by
// sections of text, and scrolled when it does not fit. A component with
// New, Update, View and a KeyMap; it ends with a result message, Closed.
package helpscreen

import (
	"fmt"
	"strings"

	"github.com/charmbracelet/bubbles/help"
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/styles"
)

// KeyMap is the help screen's keys.
type KeyMap = keymap.HelpKeys

// DefaultKeyMap returns the help screen's built-in keys.
func DefaultKeyMap() KeyMap { return keymap.DefaultKeyMap().Help() }

// Section is a titled block of text after the keys.
type Section struct {
	Title, Body string
}

// Closed is the result of closing the help.
type Closed struct{}

// Model is the open help screen.
type Model struct {
	Keys     KeyMap
	title    string
	bindings help.KeyMap
	sections []Section
	st       styles.Styles
	lines    []string // laid out for width (SetSize)
	width    int
	height   int
	offset   int
}

// New returns the help for bindings, titled title, with sections after.
func New(title string, bindings help.KeyMap, sections []Section, keys KeyMap, st styles.Styles) *Model {
	h := &Model{Keys: keys, title: title, bindings: bindings, sections: sections, st: st}
	h.SetSize(80, 24)
	return h
}

// SetSize lays the help out for a window of width × height.
func (h *Model) SetSize(width, height int) {
	h.width, h.height = width, height
	h.lines = h.layout(width)
	h.clamp()
}

// Lines returns the laid-out lines, for tests.
func (h *Model) Lines() []string { return h.lines }

// Offset returns the first line shown.
func (h *Model) Offset() int { return h.offset }

// page is how many lines of text show at once (the last line says where
// one is).
func (h *Model) page() int { return max(h.height-1, 1) }

func (h *Model) clamp() {
	h.offset = max(min(h.offset, len(h.lines)-h.page()), 0)
}

// Update scrolls or closes the help.
func (h *Model) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok {
		return nil, nil
	}
	switch {
	case key.Matches(k, h.Keys.Close, h.Keys.Cancel):
		return Closed{}, nil
	case key.Matches(k, h.Keys.Up):
		h.offset--
	case key.Matches(k, h.Keys.Down):
		h.offset++
	case key.Matches(k, h.Keys.PageUp):
		h.offset -= h.page()
	case key.Matches(k, h.Keys.PageDown):
		h.offset += h.page()
	case key.Matches(k, h.Keys.Top):
		h.offset = 0
	case key.Matches(k, h.Keys.Bottom):
		h.offset = len(h.lines)
	}
	h.clamp()
	return nil, nil
}

// column is one group of bindings, drawn.
type column struct {
	lines []string
	width int
}

// layout draws the key groups in as many columns as fit in width (each
// group whole, rows of columns one under another), then the sections.
func (h *Model) layout(width int) []string {
	out := []string{h.st.Title.Render(h.title), ""}
	var cols []column
	for _, group := range h.bindings.FullHelp() {
		keyW, descW := 0, 0
		var shown []key.Binding
		for _, b := range group {
			if !b.Enabled() {
				continue
			}
			shown = append(shown, b)
			keyW = max(keyW, cells.Width(textsafe.Line(b.Help().Key)))
			descW = max(descW, cells.Width(textsafe.Line(b.Help().Desc)))
		}
		if len(shown) == 0 {
			continue
		}
		c := column{width: keyW + 1 + descW}
		for _, b := range shown {
			c.lines = append(c.lines, h.st.Label.Render(cells.Fit(textsafe.Line(b.Help().Key), keyW))+" "+h.st.Help.Render(cells.Fit(textsafe.Line(b.Help().Desc), descW)))
		}
		cols = append(cols, c)
	}
	const gap = 3
	for len(cols) > 0 {
		n, used := 0, 0
		for n < len(cols) && (n == 0 || used+gap+cols[n].width <= width) {
			if n > 0 {
				used += gap
			}
			used += cols[n].width
			n++
		}
		rows := 0
		for _, c := range cols[:n] {
			rows = max(rows, len(c.lines))
		}
		for r := 0; r < rows; r++ {
			var b strings.Builder
			for i, c := range cols[:n] {
				if i > 0 {
					b.WriteString(strings.Repeat(" ", gap))
				}
				s := ""
				if r < len(c.lines) {
					s = c.lines[r]
				}
				b.WriteString(cells.Fit(s, c.width))
			}
			out = append(out, strings.TrimRight(b.String(), " "))
		}
		out = append(out, "")
		cols = cols[n:]
	}
	for _, s := range h.sections {
		if s.Title != "" {
			out = append(out, h.st.Title.Render(textsafe.Line(s.Title)))
		}
		out = append(out, strings.Split(ansi.Wrap(s.Body, max(width, 20), " "), "\n")...)
		out = append(out, "")
	}
	return out
}

// View draws one window of the help: the lines from the scroll position,
// and a last line saying which lines show and how to scroll and close.
func (h *Model) View(width, height int) string {
	page := max(height-1, 1)
	end := min(h.offset+page, len(h.lines))
	shown := h.lines[min(h.offset, end):end]
	where := fmt.Sprintf("lines %d–%d of %d", h.offset+1, end, len(h.lines))
	if h.offset == 0 && end == len(h.lines) {
		where = "all shown"
	}
	foot := h.st.Dim.Render(textsafe.Line(where + " · " + h.Keys.Up.Help().Key + " " + h.Keys.Down.Help().Key + " " +
		h.Keys.PageDown.Help().Key + " scroll · " + h.Keys.Close.Help().Key + " or " + h.Keys.Cancel.Help().Key + " closes"))
	return cells.Block(shown, page, width) + cells.Fit(foot, width)
}
