package keymap

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// loadWithin runs LoadFile(path) and fails the test when it has not
// returned within 5 s (a named pipe opened for reading waits for a writer;
// /dev/zero read to the end never ends).
func loadWithin(t *testing.T, path string) error {
	t.Helper()
	done := make(chan error, 1)
	go func() {
		_, err := LoadFile(path, DefaultKeyMap())
		done <- err
	}()
	select {
	case err := <-done:
		return err
	case <-time.After(5 * time.Second):
		if f, err := os.OpenFile(path, os.O_WRONLY|syscall.O_NONBLOCK, 0); err == nil {
			f.Close() // lets a reader stuck opening a pipe go
		}
		t.Fatalf("LoadFile(%s) has not returned after 5s", path)
		return nil
	}
}

// TestLoadFileRefusesNonRegular: STACKFIT_KEYS=/dev/zero, a named pipe or
// a folder is refused at once, naming the path, what it is and the fix.
func TestLoadFileRefusesNonRegular(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "keys.yaml")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skipf("no named pipes here: %v", err)
	}
	for _, c := range []struct{ path, want string }{
		{"/dev/zero", "/dev/zero is a device, not a keys file"},
		{fifo, fifo + " is a named pipe, not a keys file"},
		{dir, dir + " is a folder, not a keys file"},
	} {
		err := loadWithin(t, c.path)
		if !errors.Is(err, ErrKeys) || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "point STACKFIT_KEYS at one") {
			t.Errorf("%s: %v; want %q", c.path, err, c.want)
		}
	}
}

// TestLoadFileSizeCap: a keys file of MaxFileBytes loads; one byte more is
// refused with the limit.
func TestLoadFileSizeCap(t *testing.T) {
	p := filepath.Join(t.TempDir(), "keys.yaml")
	head := "quit: Q\n#"
	os.WriteFile(p, []byte(head+strings.Repeat("x", MaxFileBytes-len(head))), 0o644)
	if km, err := LoadFile(p, DefaultKeyMap()); err != nil || km.Quit.Keys()[0] != "Q" {
		t.Errorf("at the limit: %v", err)
	}
	os.WriteFile(p, []byte(head+strings.Repeat("x", MaxFileBytes+1-len(head))), 0o644)
	if _, err := LoadFile(p, DefaultKeyMap()); !errors.Is(err, ErrKeys) || !strings.Contains(err.Error(), p+" is over 65536 bytes (64 KiB)") {
		t.Errorf("over the limit: %v", err)
	}
}
