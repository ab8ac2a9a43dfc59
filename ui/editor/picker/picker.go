// Package picker is the editor's list to choose one entry from (the kind
// of a new layer): a component with New, Update, View and a KeyMap. It
// ends with a result message, Chosen or Cancelled.
package picker

import (
	"fmt"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/keymap"
	"stackfit/ui/editor/cells"
	"stackfit/ui/styles"
)

// KeyMap is the picker's keys.
type KeyMap = keymap.PickerKeys

// DefaultKeyMap returns the picker's built-in keys.
func DefaultKeyMap() KeyMap { return keymap.DefaultKeyMap().Picker() }

// Item is one entry: a name (a letter typed jumps to the next name
// starting with it) and a line of help.
type Item struct {
	Name, Help string
}

// Chosen is the result of accepting the selected entry.
type Chosen struct {
	Tag   any
	Index int
}

// Cancelled is the result of leaving without a choice.
type Cancelled struct{ Tag any }

// Model is an open picker.
type Model struct {
	Title  string
	Keys   KeyMap
	items  []Item
	sel    int
	page   int // entries shown at once (SetSize)
	tag    any
	st     styles.Styles
	offset int
}

// New returns a picker of items with the first selected.
func New(title string, items []Item, tag any, keys KeyMap, st styles.Styles) *Model {
	return &Model{Title: title, Keys: keys, items: items, tag: tag, st: st, page: 10}
}

// SetSize tells the picker how many lines it has, the title and the
// "more" line included.
func (p *Model) SetSize(height int) {
	p.page = max(height-2, 1)
	p.scroll()
}

// scroll keeps the selected entry in view.
func (p *Model) scroll() {
	if p.sel < p.offset {
		p.offset = p.sel
	}
	if p.sel >= p.offset+p.page {
		p.offset = p.sel - p.page + 1
	}
	p.offset = max(min(p.offset, len(p.items)-p.page), 0)
}

// Selected returns the index of the selected entry.
func (p *Model) Selected() int { return p.sel }

// Update handles a key.
func (p *Model) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok || len(p.items) == 0 {
		if ok && key.Matches(k, p.Keys.Cancel) {
			return Cancelled{p.tag}, nil
		}
		return nil, nil
	}
	n := len(p.items)
	switch {
	case key.Matches(k, p.Keys.Cancel):
		return Cancelled{p.tag}, nil
	case key.Matches(k, p.Keys.Accept):
		return Chosen{p.tag, p.sel}, nil
	case key.Matches(k, p.Keys.Up):
		p.sel = (p.sel - 1 + n) % n
	case key.Matches(k, p.Keys.Down):
		p.sel = (p.sel + 1) % n
	case key.Matches(k, p.Keys.PageUp):
		p.sel = max(p.sel-p.page, 0)
	case key.Matches(k, p.Keys.PageDown):
		p.sel = min(p.sel+p.page, n-1)
	default:
		if r := k.Runes; k.Type == tea.KeyRunes && len(r) == 1 {
			for i := 1; i <= n; i++ {
				j := (p.sel + i) % n
				if name := p.items[j].Name; name != "" && []rune(name)[0] == r[0] {
					p.sel = j
					break
				}
			}
		}
	}
	p.scroll()
	return nil, nil
}

// View draws the picker in width × height cells (height as given to
// SetSize): the title, the entries that fit around the selected one, marked ▶ so it shows without colour
// too, and a line saying how many more lie above or below.
func (p *Model) View(width, height int) string {
	lines := []string{p.st.Label.Render(p.Title)}
	room := p.page
	for i := p.offset; i < len(p.items) && i < p.offset+room; i++ {
		it := p.items[i]
		line := fmt.Sprintf("  %-12s %s", it.Name, it.Help)
		if i == p.sel {
			line = p.st.Cursor.Render(cells.Fit("▶ "+line[2:], width))
		}
		lines = append(lines, line)
	}
	above, below := p.offset, max(len(p.items)-(p.offset+room), 0)
	if above > 0 || below > 0 {
		lines = append(lines, p.st.Dim.Render(fmt.Sprintf("  %d of %d shown · ↑ %d more above · ↓ %d more below", min(room, len(p.items)), len(p.items), above, below)))
	}
	return cells.Block(lines, height, width)
}
