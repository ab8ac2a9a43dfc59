package editor

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// Update handles window sizes, keys and finished background work.
func (m *Model) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		m.width, m.height = msg.Width, msg.Height
		m.help.Width = msg.Width
		m.scrollToCursor()
		return m, nil
	case widthMsg:
		if msg.gen == m.widthGen {
			m.fit.MaxWidth, m.fit.WidthLimit, m.fit.WidthExact = msg.width, msg.limit, msg.exact
		}
		return m, nil
	case tea.KeyMsg:
		// Keys typed faster than the terminal is read arrive as one message
		// of several runes; outside text fields each is its own command.
		if msg.Type == tea.KeyRunes && len(msg.Runes) > 1 && !msg.Paste && m.mode != modeForm && m.mode != modePrompt {
			var cmds []tea.Cmd
			for _, r := range msg.Runes {
				cmds = append(cmds, m.key(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}, Alt: msg.Alt}))
				m.scrollToCursor()
			}
			return m, tea.Batch(cmds...)
		}
		cmd := m.key(msg)
		m.scrollToCursor()
		return m, cmd
	}
	return m, nil
}

// key dispatches a key to the mode that owns it.
func (m *Model) key(msg tea.KeyMsg) tea.Cmd {
	if key.Matches(msg, m.keys.ForceQuit) && m.mode != modeConfirm {
		return m.requestQuit()
	}
	switch m.mode {
	case modeForm:
		return m.updateForm(msg)
	case modePicker:
		return m.updatePicker(msg)
	case modePrompt:
		return m.updatePrompt(msg)
	case modeConfirm:
		return m.updateConfirm(msg)
	case modeChart:
		if key.Matches(msg, m.keys.ChartView, m.keys.Cancel) {
			m.mode = modeNormal
		}
		return nil
	case modeHelp:
		if key.Matches(msg, m.keys.ShowHelp, m.keys.Cancel) {
			m.mode = modeNormal
		}
		return nil
	}
	return m.normal(msg)
}

// normal handles the keys of the stack view.
func (m *Model) normal(msg tea.KeyMsg) tea.Cmd {
	k := m.keys
	page := max(m.listHeight()-1, 1)
	switch {
	case key.Matches(msg, k.Up):
		m.cursor--
	case key.Matches(msg, k.Down):
		m.cursor++
	case key.Matches(msg, k.PageUp):
		m.cursor -= page
	case key.Matches(msg, k.PageDown):
		m.cursor += page
	case key.Matches(msg, k.Top):
		m.cursor = 0
	case key.Matches(msg, k.Bottom):
		m.cursor = len(m.items) - 1
	case key.Matches(msg, k.Fold):
		m.toggleFold()
	case key.Matches(msg, k.Edit):
		m.editLayer()
	case key.Matches(msg, k.Add):
		m.openPicker()
	case key.Matches(msg, k.QuickAdd):
		m.openPrompt(promptQuick, "add", "")
	case key.Matches(msg, k.Copy):
		return m.duplicate()
	case key.Matches(msg, k.Delete):
		return m.remove()
	case key.Matches(msg, k.MoveUp):
		return m.move(-1)
	case key.Matches(msg, k.MoveDown):
		return m.move(+1)
	case key.Matches(msg, k.Select):
		if m.anchor >= 0 {
			m.anchor = -1
			m.setStatus("range cleared", statusInfo)
		} else {
			m.anchor = m.cursor
			m.setStatus("range started: move, then b wraps it in a block or x deletes it (v clears)", statusInfo)
		}
	case key.Matches(msg, k.Wrap):
		return m.wrap()
	case key.Matches(msg, k.Widen):
		return m.scaleFilters(2, 1)
	case key.Matches(msg, k.Narrow):
		return m.scaleFilters(1, 2)
	case key.Matches(msg, k.Width):
		m.openPrompt(promptWidth, "multiply every width by", "1.5")
	case key.Matches(msg, k.Stage):
		return m.insertStage()
	case key.Matches(msg, k.Undo):
		return m.undo()
	case key.Matches(msg, k.Redo):
		return m.redo()
	case key.Matches(msg, k.Settings):
		m.editSettings()
	case key.Matches(msg, k.ChartView):
		m.mode = modeChart
	case key.Matches(msg, k.Baseline):
		m.toggleBaseline()
	case key.Matches(msg, k.ShowHelp):
		m.mode = modeHelp
	case key.Matches(msg, k.Save):
		return m.save()
	case key.Matches(msg, k.SaveAs):
		name := m.path
		if name == "" {
			name = "net.yaml"
		}
		m.openPrompt(promptSaveAs, "save as", name)
	case key.Matches(msg, k.Open):
		m.open()
	case key.Matches(msg, k.Quit):
		return m.requestQuit()
	}
	m.clampCursor()
	return nil
}

func (m *Model) toggleFold() {
	it := m.current()
	if it == nil || !engine.SpecOf(it.layer.Kind).Body {
		m.setStatus("space folds blocks and gates; this is a "+kindName(it), statusError)
		return
	}
	k := it.addr.key()
	m.folded[k] = !m.folded[k]
	m.rebuild()
}

func kindName(it *item) string {
	if it == nil {
		return "empty stack"
	}
	return it.layer.Kind.String()
}

// scrollToCursor keeps the cursor inside the visible rows.
func (m *Model) scrollToCursor() {
	h := max(m.listHeight(), 1)
	if m.cursor < m.offset {
		m.offset = m.cursor
	}
	if m.cursor >= m.offset+h {
		m.offset = m.cursor - h + 1
	}
	if m.offset > max(len(m.items)-h, 0) {
		m.offset = max(len(m.items)-h, 0)
	}
	if m.offset < 0 {
		m.offset = 0
	}
}
