package editor

import (
	"errors"
	"fmt"
	"path/filepath"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/ui/store"
)

// save writes the stack to its file, or asks for one.
func (m *Model) save() tea.Cmd {
	if m.file.path == "" {
		m.openPrompt(promptSaveAs, "save as", m.untitledName())
		return nil
	}
	return m.saveTo(m.file.path)
}

// untitledName is the file name save-as offers for a stack with no file
// yet: the imported model's own name as a stack file, else net.yaml.
func (m *Model) untitledName() string {
	if m.file.saveName != "" {
		return m.file.saveName
	}
	return "net.yaml"
}

// saveTo writes the stack to path atomically; the old file stays whole if
// anything fails. A file that changed on disk since the editor read it,
// or one its permissions protect, is never written without asking.
func (m *Model) saveTo(path string) tea.Cmd { return m.saveWith(path, store.SaveMode{}) }

func (m *Model) saveWith(path string, mode store.SaveMode) tea.Cmd {
	if m.file.files == nil {
		m.setStatus("not saved: this editor was started without file access; run stackfit FILE to edit a file", statusError)
		return nil
	}
	base := m.file.base
	if path != m.file.path {
		base = nil // another file: it must not exist yet
	}
	data, note, err := m.file.files.Save(path, m.stack, base, mode)
	switch {
	case errors.Is(err, store.ErrChanged) && path == m.file.path && m.file.path != "":
		m.askWith(fmt.Sprintf("%s changed on disk since you read it — y: overwrite · n: save as another file · r: reload it · esc: keep editing", filepath.Base(path)), question{
			yes:    func() tea.Cmd { mode.Overwrite = true; return m.saveWith(path, mode) },
			no:     func() tea.Cmd { m.openPrompt(promptSaveAs, "save as", path+".mine"); return nil },
			reload: func() tea.Cmd { return m.reload(path) },
		})
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
	moved := path != m.file.path
	m.file.path, m.file.base = path, data
	m.file.dirty, m.file.unprotected = false, false // what is saved needs no recovery copy
	if m.file.journal != nil {
		err := m.file.journal.Clear()
		if moved && m.file.journalFor != nil {
			m.file.journal = m.file.journalFor(path)
		}
		m.file.journal.Rebase(data)
		if err != nil {
			m.setStatus("saved, but the recovery copy could not be removed: "+err.Error(), statusError)
			return nil
		}
	}
	if note != "" {
		m.setStatus("saved; "+note, statusError)
		return nil
	}
	m.setStatus(fmt.Sprintf("saved %s (%d rows)", filepath.Base(path), len(m.nums.res.Rows)), statusInfo)
	return nil
}

// reload reads the file again after it changed on disk, as one undoable
// change: u brings the edits made here back.
func (m *Model) reload(path string) tea.Cmd {
	s, data, err := m.file.files.Load(path)
	if err != nil {
		m.setStatus("not reloaded: "+err.Error(), statusError)
		return nil
	}
	cmd := m.change("reloaded "+filepath.Base(path)+" from disk (u brings your edits back)", func(st *engine.Stack) (addr, error) {
		*st = *s
		return nil, nil
	})
	m.file.base = data
	if m.file.journal != nil {
		m.file.journal.Rebase(data)
	}
	m.file.dirty = false
	return cmd
}

// load replaces the stack with s, read from path as data; undo history
// starts afresh.
func (m *Model) load(s *engine.Stack, data []byte, path string) {
	if m.file.journal != nil {
		m.file.journal.Clear() // the user chose to leave the unsaved edits
	}
	m.stack, m.file.path, m.file.base, m.file.dirty = s, path, data, false
	if m.file.journalFor != nil {
		m.file.journal = m.file.journalFor(path)
		m.file.journal.Rebase(data)
	}
	m.hist = history{}
	m.tree.cursor, m.tree.offset, m.tree.anchor = 0, 0, -1
	m.tree.folded = map[string]bool{}
	m.restoreFolds() // the opened file's, as last left
	m.baseline = nil
	m.recompute()
	m.setStatus("opened "+path, statusInfo)
}

// openFile asks for a file to open (first whether to drop unsaved
// changes).
func (m *Model) openFile() {
	if !m.file.dirty {
		m.openPrompt(promptOpen, "open", "")
		return
	}
	m.ask("unsaved changes will be lost — open another file anyway? (y: yes · n/esc: stay)",
		func() tea.Cmd { m.openPrompt(promptOpen, "open", ""); return nil }, nil)
}

// requestQuit quits, or asks first when there are unsaved changes.
func (m *Model) requestQuit() tea.Cmd {
	if !m.file.dirty {
		return m.quit()
	}
	m.ask("save changes before quitting? (y: save and quit · n: quit without saving · esc: stay)",
		func() tea.Cmd {
			m.save()
			if m.file.dirty {
				return nil // not saved: the status line says why
			}
			return m.quit()
		},
		func() tea.Cmd {
			if m.file.journal != nil {
				m.file.journal.Clear()
			}
			return m.quit()
		})
	return nil
}

func (m *Model) quit() tea.Cmd {
	m.quitting = true
	if !m.file.dirty && m.file.journal != nil {
		m.file.journal.Clear()
	}
	return tea.Quit
}
