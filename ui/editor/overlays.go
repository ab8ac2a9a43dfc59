package editor

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/editor/confirm"
	"stackfit/ui/editor/form"
	"stackfit/ui/editor/helpscreen"
	"stackfit/ui/editor/picker"
	"stackfit/ui/editor/prompt"
)

// overlay is what is open over the stack view: a form, the kind picker, a
// prompt, a question, the help screen or the depth chart. Each is a
// component that handles its keys and ends with a result message, which
// the editor acts on at once (so keys typed after it never reach a closed
// overlay). Model.overlay is nil when none is open.
type overlay interface {
	Update(tea.Msg) (result tea.Msg, cmd tea.Cmd)
}

// formJob is what the editor does with a form's result.
type formJob struct {
	commit    func(values []string) tea.Cmd
	cancelled string // the status line when the form is left
}

// question is what the editor does with each answer to a question.
type question struct {
	yes, no, reload func() tea.Cmd // nil: that answer only closes it
}

// chart is the depth chart overlay; it has no state of its own.
type chart struct{ keys keymap.KeyMap }

// chartClosed is the chart's result.
type chartClosed struct{}

func (c *chart) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	if k, ok := msg.(tea.KeyMsg); ok && key.Matches(k, c.keys.ChartView, c.keys.Cancel) {
		return chartClosed{}, nil
	}
	return nil, nil
}

// Mode returns which part of the key map is active: the open overlay's.
func (m *Model) Mode() keymap.Mode {
	switch m.overlay.(type) {
	case *form.Model:
		return keymap.Form
	case *picker.Model:
		return keymap.Picker
	case *prompt.Model:
		return keymap.Prompt
	case *confirm.Model:
		return keymap.Confirm
	case *helpscreen.Model:
		return keymap.Help
	case *chart:
		return keymap.Chart
	case *fitMapView:
		return keymap.FitMap
	}
	return keymap.Normal
}

// open shows o and sizes it for the window. A form or prompt that
// previews has set m.preview while it was made; see clearPreview.
func (m *Model) open(o overlay) {
	m.overlay = o
	m.sizeOverlay()
}

// clearPreview drops the last overlay's preview before a new one is made.
func (m *Model) clearPreview() { m.preview, m.previewBlocked = nil, false }

// sizeOverlay tells the open overlay the room it has.
func (m *Model) sizeOverlay() {
	switch o := m.overlay.(type) {
	case *picker.Model:
		o.SetSize(m.layout().listH)
	case *helpscreen.Model:
		o.SetSize(m.width, m.height)
	}
}

// closeOverlay closes the open overlay and drops its preview.
func (m *Model) closeOverlay() {
	m.overlay = nil
	m.clearPreview()
}

// openForm opens a form; check runs after every key (and may set
// m.preview), commit when it is accepted with every field valid.
func (m *Model) openForm(title string, fields []form.Field, check form.Check, job formJob) {
	m.clearPreview()
	m.open(form.New(title, fields, check, job, m.keys.Form(), m.st))
}

// openPrompt opens the prompt of kind k with a label and a first value.
func (m *Model) openPrompt(k promptKind, label, value string) {
	m.clearPreview()
	m.open(prompt.New(label, value, m.promptCheck(k), m.promptComplete(k), k, m.keys.Prompt(), m.st))
}

// ask opens a question; a nil action only closes it.
func (m *Model) ask(q string, yes, no func() tea.Cmd) { m.askWith(q, question{yes: yes, no: no}) }

func (m *Model) askWith(text string, q question) {
	m.clearPreview()
	m.open(confirm.New(text, q.reload != nil, q, m.keys.Confirm(), m.st))
}

// openHelp opens the help screen.
func (m *Model) openHelp() {
	m.clearPreview()
	m.open(helpscreen.New("stackfit — keys", m.keys, m.helpSections(), m.keys.Help(), m.st))
}

// routeOverlay gives a key to the open overlay and acts on its result.
func (m *Model) routeOverlay(msg tea.KeyMsg) tea.Cmd {
	res, cmd := m.overlay.Update(msg)
	if res == nil {
		return cmd
	}
	return tea.Batch(cmd, m.result(res))
}

// result acts on an overlay's result message.
func (m *Model) result(res tea.Msg) tea.Cmd {
	switch r := res.(type) {
	case form.Submitted:
		m.closeOverlay()
		return r.Tag.(formJob).commit(r.Values)
	case form.Cancelled:
		m.closeOverlay()
		if s := r.Tag.(formJob).cancelled; s != "" {
			m.setStatus(s, statusInfo)
		}
	case picker.Chosen:
		m.closeOverlay()
		if kinds := engine.Kinds(); r.Index >= len(kinds) {
			return m.addUse(m.stack.Units[r.Index-len(kinds)].Name)
		}
		return m.addKind(engine.Kinds()[r.Index])
	case picker.Cancelled:
		m.closeOverlay()
		m.setStatus("nothing added", statusInfo)
	case prompt.Submitted:
		return m.submitPrompt(r.Tag.(promptKind), r.Value)
	case prompt.Cancelled:
		m.closeOverlay()
		m.promptCancelled(r.Tag.(promptKind))
	case confirm.Answered:
		m.closeOverlay()
		q := r.Tag.(question)
		var act func() tea.Cmd
		switch r.Answer {
		case confirm.Yes:
			act = q.yes
		case confirm.No:
			act = q.no
		case confirm.Reload:
			act = q.reload
		default:
			m.setStatus("", statusInfo)
		}
		if act != nil {
			return act()
		}
	case helpscreen.Closed, chartClosed:
		m.closeOverlay()
	case fitMapClosed:
		m.closeFitMap()
	case fitMapChosen:
		return m.applyFitCell(r.cell)
	}
	return nil
}

// openPicker opens the kind picker.
func (m *Model) openPicker() {
	kinds := engine.Kinds()
	items := make([]picker.Item, len(kinds), len(kinds)+len(m.stack.Units))
	for i, k := range kinds {
		items[i] = picker.Item{Name: k.String(), Help: engine.SpecOf(k).Help}
	}
	for _, u := range m.stack.Units { // the file's units, after the kinds
		help := u.Note
		if help == "" {
			help = "a unit of this file"
		}
		items = append(items, picker.Item{Name: "unit " + u.Name, Help: help})
	}
	m.clearPreview()
	m.open(picker.New("add which kind of layer? (a letter jumps to it)", items, nil, m.keys.Picker(), m.st))
}
