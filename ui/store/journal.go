package store

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// Journal keeps the unsaved state of a stack beside its file, so that a
// crash or a killed terminal loses no edit. It writes the whole stack, in
// stack-file form, atomically, after every change.
type Journal struct {
	Path string // the recovery file
	For  string // the stack file it guards, for messages ("" when untitled)
}

// JournalFor returns the journal of the stack file path: a hidden file
// beside it, ".NAME.unsaved". An untitled stack (path "") is journaled in
// stateDir (Paths.State) as "untitled.unsaved".
func JournalFor(path, stateDir string) *Journal {
	if path == "" {
		return &Journal{Path: filepath.Join(stateDir, "untitled.unsaved")}
	}
	return &Journal{Path: filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".unsaved"), For: path}
}

// Record writes s to the journal.
func (j *Journal) Record(s *engine.Stack) error {
	data, err := stackfile.Save(s)
	if err != nil {
		return err
	}
	head := "# stackfit: unsaved edits"
	if j.For != "" {
		head += " of " + fmt.Sprintf("%q", j.For)
	}
	head += "; stackfit offers to restore them the next time the file is opened\n"
	if err := os.MkdirAll(filepath.Dir(j.Path), 0o755); err != nil {
		return fmt.Errorf("recovery file: %w", err)
	}
	return WriteFileAtomic(j.Path, append([]byte(head), data...), 0o600)
}

// Clear removes the journal; a missing journal is not an error.
func (j *Journal) Clear() error {
	err := os.Remove(j.Path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	return err
}

// Recovered is what a journal held.
type Recovered struct {
	Stack *engine.Stack
	At    time.Time // when it was last written
}

// Check looks for unsaved edits: it returns them when the journal exists
// and differs from current (the stack as loaded from its file, nil when the
// file is new); nil when there is nothing to restore. A damaged journal is
// an error and stays in place.
func (j *Journal) Check(current *engine.Stack) (*Recovered, error) {
	info, err := os.Stat(j.Path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("recovery file %s: %w", j.Path, err)
	}
	s, err := LoadFile(j.Path)
	if err != nil {
		return nil, fmt.Errorf("recovery file %s is damaged and was left in place: %w", j.Path, err)
	}
	if current != nil {
		a, _ := stackfile.Save(s)
		b, _ := stackfile.Save(current)
		if bytes.Equal(a, b) {
			j.Clear() // nothing unsaved after all
			return nil, nil
		}
	}
	return &Recovered{Stack: s, At: info.ModTime()}, nil
}
