package editor

import (
	"fmt"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/editor/confirm"
	"stackfit/ui/editor/form"
	"stackfit/ui/editor/prompt"
)

// Update handles window sizes, keys and finished background work.
func (m *Model) Update(msg tea.Msg) (tea.Model, tea.Cmd) {
	switch msg := msg.(type) {
	case tea.WindowSizeMsg:
		m.width, m.height = msg.Width, msg.Height
		m.help.Width = msg.Width
		m.sizeOverlay()
		m.tree.scroll(m.listHeight())
		return m, nil
	case widthMsg:
		if msg.gen == m.nums.widthGen {
			m.nums.fit.MaxWidth, m.nums.fit.WidthLimit, m.nums.fit.WidthExact = msg.width, msg.limit, msg.exact
			m.nums.widthState = widthDone
			m.stopWidth() // it has ended; this releases its context
		}
		return m, nil
	case fitMapMsg:
		m.fitMapIn(msg)
		return m, nil
	case tea.KeyMsg:
		// Keys typed faster than the terminal is read arrive as one message
		// of several runes; outside text fields each is its own command.
		if msg.Type == tea.KeyRunes && len(msg.Runes) > 1 && !msg.Paste && !m.typing() {
			var cmds []tea.Cmd
			for _, r := range msg.Runes {
				cmds = append(cmds, m.key(tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune{r}, Alt: msg.Alt}))
				m.tree.scroll(m.listHeight())
			}
			return m, tea.Batch(cmds...)
		}
		cmd := m.key(msg)
		m.tree.scroll(m.listHeight())
		m.forgetDetailScroll()
		return m, cmd
	}
	return m, nil
}

// key gives a key to the open overlay, or to the stack view.
func (m *Model) key(msg tea.KeyMsg) tea.Cmd {
	m.statusNew = false
	if key.Matches(msg, m.keys.ForceQuit) || msg.String() == keymap.AlwaysQuit {
		if _, asking := m.overlay.(*confirm.Model); asking {
			return m.quit() // ctrl+c on a question quits at once
		}
		return m.requestQuit()
	}
	if m.overlay != nil {
		return m.routeOverlay(msg)
	}
	return m.normal(msg)
}

// typing reports whether a text field has the keys (a form or a prompt).
func (m *Model) typing() bool {
	switch m.overlay.(type) {
	case *form.Model, *prompt.Model:
		return true
	}
	return false
}

// normal handles the keys of the stack view.
func (m *Model) normal(msg tea.KeyMsg) tea.Cmd {
	k := m.keys
	page := max(m.listHeight()-1, 1)
	switch {
	case key.Matches(msg, k.Up):
		m.tree.cursor--
	case key.Matches(msg, k.Down):
		m.tree.cursor++
	case key.Matches(msg, k.PageUp):
		m.tree.cursor -= page
	case key.Matches(msg, k.PageDown):
		m.tree.cursor += page
	case key.Matches(msg, k.Top):
		m.tree.cursor = 0
	case key.Matches(msg, k.Bottom):
		m.tree.cursor = len(m.tree.items) - 1
	case key.Matches(msg, k.Fold):
		m.toggleFold()
		m.saveFolds()
	case key.Matches(msg, k.FoldAll):
		m.setAllFolded(true)
	case key.Matches(msg, k.UnfoldAll):
		m.setAllFolded(false)
	case key.Matches(msg, k.NextProblem):
		m.jumpProblem(+1)
	case key.Matches(msg, k.PrevProblem):
		m.jumpProblem(-1)
	case key.Matches(msg, k.DetailsDown):
		m.scrollDetails(+1)
	case key.Matches(msg, k.DetailsUp):
		m.scrollDetails(-1)
	case key.Matches(msg, k.Edit):
		m.editLayer()
	case key.Matches(msg, k.Add):
		m.openPicker()
	case key.Matches(msg, k.QuickAdd):
		m.openPrompt(promptQuick, "add", "")
	case key.Matches(msg, k.Copy):
		return m.duplicate()
	case key.Matches(msg, k.Delete):
		return m.apply(m.tree.remove())
	case key.Matches(msg, k.MoveUp):
		return m.apply(m.tree.move(-1))
	case key.Matches(msg, k.MoveDown):
		return m.apply(m.tree.move(+1))
	case key.Matches(msg, k.Select):
		if m.tree.anchor >= 0 {
			m.tree.anchor = -1
			m.setStatus("range cleared", statusInfo)
		} else {
			m.tree.anchor = m.tree.cursor
			m.setStatus("range started: move, then b wraps it in a block, c copies it or x deletes it (v clears)", statusInfo)
		}
	case key.Matches(msg, k.Wrap):
		return m.apply(m.tree.wrap(m.stack))
	case key.Matches(msg, k.Widen):
		return m.apply(m.tree.scaleFilters(2, 1))
	case key.Matches(msg, k.Narrow):
		return m.apply(m.tree.scaleFilters(1, 2))
	case key.Matches(msg, k.Width):
		m.openPrompt(promptWidth, "multiply every width by", "1.5")
	case key.Matches(msg, k.Stage):
		return m.insertStage()
	case key.Matches(msg, k.UpStage):
		return m.insertUpStage()
	case key.Matches(msg, k.Undo):
		return m.undo()
	case key.Matches(msg, k.Redo):
		return m.redo()
	case key.Matches(msg, k.Settings):
		m.editSettings()
	case key.Matches(msg, k.ChartView):
		m.clearPreview()
		m.open(&chart{keys: m.keys})
	case key.Matches(msg, k.MapView):
		return m.openFitMap()
	case key.Matches(msg, k.Baseline):
		m.toggleBaseline()
	case key.Matches(msg, k.ShareView):
		m.toggleShare()
	case key.Matches(msg, k.ShowHelp):
		m.openHelp()
	case key.Matches(msg, k.Save):
		return m.save()
	case key.Matches(msg, k.SaveAs):
		name := m.file.path
		if name == "" {
			name = m.untitledName()
		}
		m.openPrompt(promptSaveAs, "save as", name)
	case key.Matches(msg, k.Open):
		m.openFile()
	case key.Matches(msg, k.Quit):
		return m.requestQuit()
	}
	m.tree.clamp()
	return nil
}

func (m *Model) toggleFold() {
	it := m.tree.current()
	switch {
	case it != nil && it.gen != nil && it.gen.repeat > 0:
		m.tree.opened[it.gen.key] = !m.tree.opened[it.gen.key]
	case it == nil || it.gen != nil || !engine.SpecOf(it.layer.Kind).Body:
		m.setStatus("space folds blocks, gates, forks and later repeats; this is "+kindName(it), statusError)
		return
	default:
		k := it.addr.key()
		m.tree.folded[k] = !m.tree.folded[k]
	}
	m.tree.rebuild(m.stack, &m.nums.res)
}

func kindName(it *item) string {
	switch {
	case it == nil:
		return "an empty stack"
	case it.gen != nil:
		return it.gen.what
	}
	return "a " + it.layer.Kind.String()
}

// toggleShare switches the side column's share bar between activation
// memory and the estimated time, and says which it shows.
func (m *Model) toggleShare() {
	if !m.nums.timed {
		m.shareTime = false
		m.setStatus("the time share needs a GPU model and a stack without errors: set gpu in the training setup ("+m.keys.Settings.Help().Key+")", statusError)
		return
	}
	m.shareTime = !m.shareTime
	if m.shareTime {
		m.setStatus(fmt.Sprintf("share bar: each row's share of the estimated layer time on %s (%s: memory)", m.nums.time.Device.Key, m.keys.ShareView.Help().Key), statusInfo)
		return
	}
	m.setStatus(fmt.Sprintf("share bar: each row's share of the kept activations (%s: time)", m.keys.ShareView.Help().Key), statusInfo)
}
