package store

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"syscall"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// ErrChanged says the file on disk is no longer what the editor last read
// or wrote: another editor, a checkout or a script changed it.
var ErrChanged = errors.New("changed on disk")

// ErrReadOnly says the file may not be written by its permissions.
var ErrReadOnly = errors.New("read-only")

// Disk reads and writes stack files on the local disk: the file access the
// command line gives the editor.
type Disk struct{}

// Load reads the stack file at path and returns it with the bytes read
// (the stack is parsed from exactly those bytes, read once).
func (Disk) Load(path string) (*engine.Stack, []byte, error) { return loadFile(path) }

// SaveMode relaxes the checks a save makes.
type SaveMode struct {
	Overwrite bool // write even though the file changed since it was read
	ReadOnly  bool // write even though the file's permissions forbid it
}

// Save writes s to path over base, the bytes the caller last read from or
// wrote to it (nil: the file should not exist yet). It refuses with
// ErrChanged when the file on disk differs from base and with ErrReadOnly
// when its permissions forbid writing, unless mode says otherwise. The
// new content keeps base's comments (stackfile.SaveOver); through a
// symbolic link the target is written. It returns the bytes written and a
// note for the user ("" or, for a file with other hard links, that they
// keep the old content).
func (Disk) Save(path string, s *engine.Stack, base []byte, mode SaveMode) ([]byte, string, error) {
	target := Target(path)
	cur, err := readFile(target)
	exists := err == nil
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return nil, "", fmt.Errorf("save %s: %w", path, err)
	}
	if !mode.Overwrite {
		switch {
		case base == nil && exists:
			return nil, "", fmt.Errorf("%w: %s exists and was not read by this editor", ErrChanged, path)
		case base != nil && !exists:
			return nil, "", fmt.Errorf("%w: %s was removed or moved since it was read", ErrChanged, path)
		case base != nil && !bytes.Equal(cur, base):
			return nil, "", fmt.Errorf("%w: %s was changed by another program since it was read", ErrChanged, path)
		}
	}
	if exists && !mode.ReadOnly && readOnly(target) {
		return nil, "", fmt.Errorf("%w: %s may not be written (its permissions)", ErrReadOnly, path)
	}
	data, err := stackfile.SaveOver(base, s)
	if err != nil {
		return nil, "", err
	}
	var links uint64
	if info, err := os.Stat(target); err == nil {
		if st, ok := info.Sys().(*syscall.Stat_t); ok {
			links = uint64(st.Nlink)
		}
	}
	if err := WriteFileAtomic(target, data, 0o644); err != nil {
		return nil, "", err
	}
	note := ""
	if links > 1 {
		note = fmt.Sprintf("%s had %d hard links: the other names still hold the old content (a safe save writes a new file)", path, links)
	}
	return data, note, nil
}

// readOnly reports whether the file's permissions forbid writing it: the
// process may not, or (for root, who may write anything) nobody is meant
// to, its mode having no write bit.
func readOnly(path string) bool {
	if syscall.Access(path, 2 /* W_OK */) != nil {
		return true
	}
	info, err := os.Stat(path)
	return err == nil && info.Mode().Perm()&0o222 == 0
}

// readFile reads a whole file of at most stackfile.MaxFileBytes.
func readFile(path string) ([]byte, error) {
	f, err := openRegular(path) // never blocks on a pipe or a device

	if err != nil {
		return nil, err
	}
	defer f.Close()
	return readLimited(f, stackfile.MaxFileBytes)
}
