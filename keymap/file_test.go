package keymap

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"stackfit/engine/textsafe"
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

// TestParseKeepsAWayOut: a keys file may rebind quit, force-quit and save
// but not leave them without a key, and may not give ctrl+c to another
// action; the message names the action and the fix. Common practice:
// ctrl+c ends a terminal program whatever else is configured.
func TestParseKeepsAWayOut(t *testing.T) {
	tests := []struct {
		file string
		want string // "" when the file is accepted
	}{
		{"quit: []", "quit: [] would leave no key to leave the editor; give quit a key"},
		{"force-quit: []", "force-quit: [] would leave no key to leave the editor from any screen"},
		{"save: []", "save: [] would leave no key to save your work; give save a key"},
		{"undo: ctrl+c", "undo: ctrl+c always quits and cannot be bound to another action; give undo another key"},
		{"quit: [Q, ctrl+c]", "quit: ctrl+c always quits"},
		{"quit: Q\nsave: [S]", ""},
		{"undo: []", ""},
		{"force-quit: ctrl+q", ""},
	}
	for _, tt := range tests {
		km, err := Parse([]byte(tt.file), DefaultKeyMap())
		if tt.want == "" {
			if err != nil {
				t.Errorf("%q: %v", tt.file, err)
			}
			if !km.ForceQuit.Enabled() || !slices.Contains(km.ForceQuit.Keys(), AlwaysQuit) {
				t.Errorf("%q: force-quit %v lacks %s", tt.file, km.ForceQuit.Keys(), AlwaysQuit)
			}
			continue
		}
		if !errors.Is(err, ErrKeys) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%q: %v; want %q", tt.file, err, tt.want)
		}
		if !km.Quit.Enabled() || !km.Save.Enabled() || !slices.Contains(km.ForceQuit.Keys(), AlwaysQuit) {
			t.Errorf("%q: a refused file must leave the defaults", tt.file)
		}
	}
}

// TestLoadFileEscapesLabels: a key name holding an escape sequence (an
// OSC that retitles the terminal, a CSI) comes back with a label that
// holds no control character, whatever renders it.
func TestLoadFileEscapesLabels(t *testing.T) {
	p := filepath.Join(t.TempDir(), "keys.yaml")
	tests := []string{
		"\"\\e]0;owned\\a\"",
		"\"\\e[2J\"",
		"\"a\\u009b31m\"",
		"\"\\u202eq\"",
	}
	for _, k := range tests {
		os.WriteFile(p, []byte("quit: "+k+"\n"), 0o644)
		km, err := LoadFile(p, DefaultKeyMap())
		if err != nil {
			t.Fatalf("%s: %v", k, err)
		}
		label := km.Quit.Help().Key
		if !textsafe.Safe(label) {
			t.Errorf("%s: label %q reaches the terminal raw", k, label)
		}
		if !strings.Contains(label, `\x1b`) && !strings.Contains(label, `\u`) {
			t.Errorf("%s: label %q does not show the escape", k, label)
		}
	}
}
