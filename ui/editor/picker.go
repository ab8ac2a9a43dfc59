package editor

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// picker chooses the kind of a new layer.
type picker struct {
	kinds []engine.Kind
	sel   int
}

func (m *Model) openPicker() {
	m.picker = &picker{kinds: engine.Kinds()}
	m.mode = modePicker
}

func (m *Model) updatePicker(msg tea.KeyMsg) tea.Cmd {
	p := m.picker
	switch {
	case key.Matches(msg, m.keys.Cancel):
		m.picker, m.mode = nil, modeNormal
		return nil
	case key.Matches(msg, m.keys.Up):
		p.sel = (p.sel - 1 + len(p.kinds)) % len(p.kinds)
	case key.Matches(msg, m.keys.Down):
		p.sel = (p.sel + 1) % len(p.kinds)
	case key.Matches(msg, m.keys.Accept):
		k := p.kinds[p.sel]
		m.picker, m.mode = nil, modeNormal
		cmd := m.insertAfter(newLayer(k, m.channelsAt()), "added "+k.String())
		if sp := engine.SpecOf(k); sp.Main != nil || len(sp.Params) > 0 {
			m.editLayer()
		}
		return cmd
	default:
		// A letter jumps to the next kind starting with it.
		if r := msg.Runes; len(r) == 1 {
			for i := 1; i <= len(p.kinds); i++ {
				j := (p.sel + i) % len(p.kinds)
				if n := p.kinds[j].String(); n != "" && rune(n[0]) == r[0] {
					p.sel = j
					break
				}
			}
		}
	}
	return nil
}
