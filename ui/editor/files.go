package editor

import (
	"errors"
	"fmt"
	"path/filepath"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/ui/store"
)

// confirm asks a yes/no question; yes and no run their actions.
type confirm struct {
	question string
	yes, no  func() tea.Cmd
	reload   func() tea.Cmd // offered only when set
}

func (m *Model) ask(q string, yes, no func() tea.Cmd) {
	m.confirm = &confirm{question: q, yes: yes, no: no}
	m.mode = modeConfirm
}

func (m *Model) updateConfirm(msg tea.KeyMsg) tea.Cmd {
	c := m.confirm
	switch {
	case key.Matches(msg, m.keys.ForceQuit):
		return m.quit()
	case key.Matches(msg, m.keys.Yes):
		m.confirm, m.mode = nil, modeNormal
		return c.yes()
	case c.reload != nil && key.Matches(msg, m.keys.Reload):
		m.confirm, m.mode = nil, modeNormal
		return c.reload()
	case key.Matches(msg, m.keys.No):
		m.confirm, m.mode = nil, modeNormal
		if c.no != nil {
			return c.no()
		}
	case key.Matches(msg, m.keys.Cancel):
		m.confirm, m.mode = nil, modeNormal
		m.setStatus("", statusInfo)
	}
	return nil
}

// save writes the stack to its file, or asks for one.
func (m *Model) save() tea.Cmd {
	if m.path == "" {
		m.openPrompt(promptSaveAs, "save as", "net.yaml")
		return nil
	}
	return m.saveTo(m.path)
}

// saveTo writes the stack to path atomically; the old file stays whole if
// anything fails. A file that changed on disk since the editor read it,
// or one its permissions protect, is never written without asking.
func (m *Model) saveTo(path string) tea.Cmd { return m.saveWith(path, store.SaveMode{}) }

func (m *Model) saveWith(path string, mode store.SaveMode) tea.Cmd {
	if m.files == nil {
		m.setStatus("not saved: this editor was started without file access; run stackfit FILE to edit a file", statusError)
		return nil
	}
	base := m.base
	if path != m.path {
		base = nil // another file: it must not exist yet
	}
	data, note, err := m.files.Save(path, m.stack, base, mode)
	switch {
	case errors.Is(err, store.ErrChanged) && path == m.path && m.path != "":
		m.ask(fmt.Sprintf("%s changed on disk since you read it — y: overwrite · n: save as another file · r: reload it · esc: keep editing", filepath.Base(path)),
			func() tea.Cmd { mode.Overwrite = true; return m.saveWith(path, mode) },
			func() tea.Cmd { m.openPrompt(promptSaveAs, "save as", path+".mine"); return nil })
		m.confirm.reload = func() tea.Cmd { return m.reload(path) }
		return nil
	case errors.Is(err, store.ErrChanged):
		m.ask(fmt.Sprintf("%s exists and was not read here — y: replace it · n: another name · esc: keep editing", filepath.Base(path)),
			func() tea.Cmd { mode.Overwrite = true; return m.saveWith(path, mode) },
			func() tea.Cmd { m.openPrompt(promptSaveAs, "save as", path); return nil })
		return nil
	case errors.Is(err, store.ErrReadOnly):
		m.ask(fmt.Sprintf("%s is read-only — y: write anyway (stays read-only) · n: another name · esc: keep editing", filepath.Base(path)),
			func() tea.Cmd { mode.ReadOnly = true; return m.saveWith(path, mode) },
			func() tea.Cmd { m.openPrompt(promptSaveAs, "save as", path); return nil })
		return nil
	case err != nil:
		m.setStatus("not saved: "+err.Error(), statusError)
		return nil
	}
	moved := path != m.path
	m.path, m.base = path, data
	m.dirty, m.unprotected = false, false // what is saved needs no recovery copy
	if m.journal != nil {
		err := m.journal.Clear()
		if moved && m.journalFor != nil {
			m.journal = m.journalFor(path)
		}
		m.journal.Rebase(data)
		if err != nil {
			m.setStatus("saved, but the recovery copy could not be removed: "+err.Error(), statusError)
			return nil
		}
	}
	if note != "" {
		m.setStatus("saved; "+note, statusError)
		return nil
	}
	m.setStatus(fmt.Sprintf("saved %s (%d rows)", filepath.Base(path), len(m.res.Rows)), statusInfo)
	return nil
}

// reload reads the file again after it changed on disk, as one undoable
// change: u brings the edits made here back.
func (m *Model) reload(path string) tea.Cmd {
	s, data, err := m.files.Load(path)
	if err != nil {
		m.setStatus("not reloaded: "+err.Error(), statusError)
		return nil
	}
	cmd := m.change("reloaded "+filepath.Base(path)+" from disk (u brings your edits back)", func(st *engine.Stack) (addr, error) {
		*st = *s
		return nil, nil
	})
	m.base = data
	if m.journal != nil {
		m.journal.Rebase(data)
	}
	m.dirty = false
	return cmd
}

// load replaces the stack with s, read from path as data; undo history
// starts afresh.
func (m *Model) load(s *engine.Stack, data []byte, path string) {
	if m.journal != nil {
		m.journal.Clear() // the user chose to leave the unsaved edits
	}
	m.stack, m.path, m.base, m.dirty = s, path, data, false
	if m.journalFor != nil {
		m.journal = m.journalFor(path)
		m.journal.Rebase(data)
	}
	m.hist = history{}
	m.cursor, m.offset, m.anchor = 0, 0, -1
	m.folded = map[string]bool{}
	m.baseline = nil
	m.recompute()
	m.setStatus("opened "+path, statusInfo)
}

func (m *Model) open() {
	if !m.dirty {
		m.openPrompt(promptOpen, "open", "")
		return
	}
	m.ask("unsaved changes will be lost — open another file anyway? (y: yes · n/esc: stay)",
		func() tea.Cmd { m.openPrompt(promptOpen, "open", ""); return nil }, nil)
}

// requestQuit quits, or asks first when there are unsaved changes.
func (m *Model) requestQuit() tea.Cmd {
	if !m.dirty {
		return m.quit()
	}
	m.ask("save changes before quitting? (y: save and quit · n: quit without saving · esc: stay)",
		func() tea.Cmd {
			m.save()
			if m.dirty {
				return nil // not saved: the status line says why
			}
			return m.quit()
		},
		func() tea.Cmd {
			if m.journal != nil {
				m.journal.Clear()
			}
			return m.quit()
		})
	return nil
}

func (m *Model) quit() tea.Cmd {
	m.quitting = true
	if !m.dirty && m.journal != nil {
		m.journal.Clear()
	}
	return tea.Quit
}
