package store

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine/stackfile"
)

// TestLoadFileNamesFile checks that file errors carry the path.
func TestLoadFileNamesFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "bad.yaml")
	os.WriteFile(p, []byte("stackfit: 1\ninput: [3, 8, 8]\nlayers: [{dense: x}]\n"), 0o644)
	_, err := LoadFile(p)
	if err == nil || !strings.HasPrefix(err.Error(), p+":3:18: layer 1 (dense)") {
		t.Errorf("err = %v", err)
	}
	if _, err := LoadFile(filepath.Join(t.TempDir(), "missing.yaml")); err == nil || !strings.Contains(err.Error(), "no such file") {
		t.Errorf("missing file: %v", err)
	}
}

// TestLoadFileTooLarge checks that a file over the loader's limit
// (stackfile.MaxFileBytes, 8 MiB) is refused with ErrTooLarge and the path.
func TestLoadFileTooLarge(t *testing.T) {
	p := filepath.Join(t.TempDir(), "huge.yaml")
	os.WriteFile(p, make([]byte, stackfile.MaxFileBytes+1), 0o644)
	_, err := LoadFile(p)
	if !errors.Is(err, stackfile.ErrTooLarge) || !strings.Contains(err.Error(), p) {
		t.Errorf("err = %v", err)
	}
}
