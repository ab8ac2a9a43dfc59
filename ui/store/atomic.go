package store

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// fileSystem is what an atomic write needs from the operating system; the
// tests put a failing one in its place to simulate a full disk, a
// read-only folder or an interrupted rename.
type fileSystem interface {
	CreateTemp(dir, pattern string) (tempFile, error)
	Rename(oldpath, newpath string) error
	Remove(name string) error
	Stat(name string) (fs.FileInfo, error)
}

// tempFile is the part of *os.File an atomic write uses.
type tempFile interface {
	io.Writer
	Name() string
	Chmod(fs.FileMode) error
	Sync() error
	Close() error
}

type osFS struct{}

func (osFS) CreateTemp(dir, pattern string) (tempFile, error) { return os.CreateTemp(dir, pattern) }
func (osFS) Rename(o, n string) error                         { return os.Rename(o, n) }
func (osFS) Remove(n string) error                            { return os.Remove(n) }
func (osFS) Stat(n string) (fs.FileInfo, error)               { return os.Stat(n) }

// WriteFileAtomic replaces path with data so that a reader sees either the
// old file or the new one, never a mix: it writes a temporary file in the
// same folder, syncs it, and renames it over path. An existing file keeps
// its permissions; a new one gets perm. On any failure — a read-only
// folder, a full disk, an interrupted write — the old file is left
// byte-identical, the temporary file is removed, and the error says what
// happened.
func WriteFileAtomic(path string, data []byte, perm fs.FileMode) error {
	return writeAtomic(osFS{}, path, data, perm)
}

func writeAtomic(fsys fileSystem, path string, data []byte, perm fs.FileMode) (err error) {
	if info, statErr := fsys.Stat(path); statErr == nil {
		if !info.Mode().IsRegular() {
			return fmt.Errorf("save %s: not a regular file; choose another name", path)
		}
		perm = info.Mode().Perm()
	} else if !errors.Is(statErr, fs.ErrNotExist) {
		return fmt.Errorf("save %s: %w", path, statErr)
	}
	dir := filepath.Dir(path)
	tmp, err := fsys.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("save %s: cannot create a file in %s (%w); save elsewhere or fix the folder's permissions — the old file is unchanged", path, dir, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			fsys.Remove(tmp.Name())
		}
	}()
	if _, err = tmp.Write(data); err != nil {
		return fmt.Errorf("save %s: write failed (%w); is the disk full? The old file is unchanged", path, err)
	}
	if err = tmp.Chmod(perm); err != nil {
		return fmt.Errorf("save %s: set permissions: %w; the old file is unchanged", path, err)
	}
	if err = tmp.Sync(); err != nil {
		return fmt.Errorf("save %s: sync failed (%w); the old file is unchanged", path, err)
	}
	if err = tmp.Close(); err != nil {
		return fmt.Errorf("save %s: close failed (%w); the old file is unchanged", path, err)
	}
	if err = fsys.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("save %s: rename failed (%w); the old file is unchanged", path, err)
	}
	if d, derr := os.Open(dir); derr == nil {
		d.Sync() // best effort: persist the rename itself
		d.Close()
	}
	return nil
}

// SaveFile writes s to path in canonical form, atomically.
func SaveFile(path string, s *engine.Stack) error {
	data, err := stackfile.Save(s)
	if err != nil {
		return err
	}
	return WriteFileAtomic(path, data, 0o644)
}
