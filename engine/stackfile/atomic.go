package stackfile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"

	"stackfit/engine"
)

// WriteFileAtomic replaces path with data so that a reader sees either the
// old file or the new one, never a mix: it writes a temporary file in the
// same folder, syncs it, and renames it over path. An existing file keeps
// its permissions; a new one gets perm. On any failure the old file is left
// untouched and the temporary file removed.
func WriteFileAtomic(path string, data []byte, perm fs.FileMode) (err error) {
	if info, statErr := os.Stat(path); statErr == nil {
		if !info.Mode().IsRegular() {
			return fmt.Errorf("save %s: not a regular file", path)
		}
		perm = info.Mode().Perm()
	} else if !errors.Is(statErr, fs.ErrNotExist) {
		return fmt.Errorf("save %s: %w", path, statErr)
	}
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("save %s: cannot create a file in %s: %w", path, dir, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	if _, err = tmp.Write(data); err != nil {
		return fmt.Errorf("save %s: write: %w", path, err)
	}
	if err = tmp.Chmod(perm); err != nil {
		return fmt.Errorf("save %s: set permissions: %w", path, err)
	}
	if err = tmp.Sync(); err != nil {
		return fmt.Errorf("save %s: sync: %w", path, err)
	}
	if err = tmp.Close(); err != nil {
		return fmt.Errorf("save %s: close: %w", path, err)
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("save %s: rename: %w", path, err)
	}
	if d, derr := os.Open(dir); derr == nil {
		d.Sync() // best effort: persist the rename itself
		d.Close()
	}
	return nil
}

// SaveFile writes s to path in canonical form, atomically.
func SaveFile(path string, s *engine.Stack) error {
	data, err := Save(s)
	if err != nil {
		return err
	}
	return WriteFileAtomic(path, data, 0o644)
}
