package store

import (
	"errors"
	"net"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// loadWithin runs LoadFile(path) and fails the test when it has not
// returned within d (a named pipe opened for reading waits for a writer).
func loadWithin(t *testing.T, path string, d time.Duration) error {
	t.Helper()
	done := make(chan error, 1)
	go func() {
		_, err := LoadFile(path)
		done <- err
	}()
	select {
	case err := <-done:
		return err
	case <-time.After(d):
		unblockFIFO(path)
		t.Fatalf("LoadFile(%s) has not returned after %v", path, d)
		return nil
	}
}

// unblockFIFO opens path for writing without waiting and closes it, so a
// reader stuck opening the pipe sees its end.
func unblockFIFO(path string) {
	if f, err := os.OpenFile(path, os.O_WRONLY|syscall.O_NONBLOCK, 0); err == nil {
		f.Close()
	}
}

// TestLoadFileRefusesNonRegular: a named pipe, a device, a socket and a
// folder are refused at once, with the path, what it is and a fix — a
// named pipe without being opened for reading (POSIX open(2): opening a
// FIFO read-only blocks until a writer opens it).
func TestLoadFileRefusesNonRegular(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "net.yaml")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skipf("no named pipes here: %v", err)
	}
	sock := filepath.Join(dir, "s.yaml")
	var cases = []struct{ path, want string }{
		{fifo, fifo + " is a named pipe, not a stack file"},
		{dir, dir + " is a folder, not a stack file"},
		{"/dev/null", "/dev/null is a character device, not a stack file"},
	}
	if l, err := net.Listen("unix", sock); err == nil {
		defer l.Close()
		cases = append(cases, struct{ path, want string }{sock, sock + " is a socket, not a stack file"})
	}
	for _, c := range cases {
		err := loadWithin(t, c.path, 5*time.Second)
		if !errors.Is(err, ErrNotRegular) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v; want %q", c.path, err, c.want)
		}
	}
	if err := loadWithin(t, fifo, 5*time.Second); !strings.Contains(err.Error(), "give - and redirect it") {
		t.Errorf("the pipe's message gives no fix: %v", err)
	}
	// A symbolic link is followed: to a pipe it is refused the same way.
	link := filepath.Join(dir, "link.yaml")
	os.Symlink(fifo, link)
	if err := loadWithin(t, link, 5*time.Second); !errors.Is(err, ErrNotRegular) {
		t.Errorf("link to a pipe: %v", err)
	}
	if err := CheckRegular(filepath.Join(dir, "missing.yaml")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing: %v", err)
	}
}

// TestSameFile: one file under two spellings, a symbolic link and a hard
// link is the same file; two files, or a missing one, are not.
func TestSameFile(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.yaml"), filepath.Join(dir, "b.yaml")
	os.WriteFile(a, []byte("x"), 0o644)
	os.WriteFile(b, []byte("x"), 0o644)
	os.Symlink(a, filepath.Join(dir, "sym.yaml"))
	os.Link(a, filepath.Join(dir, "hard.yaml"))
	for _, p := range []string{a, dir + "/./a.yaml", filepath.Join(dir, "sym.yaml"), filepath.Join(dir, "hard.yaml")} {
		if !SameFile(a, p) {
			t.Errorf("%s is not %s", p, a)
		}
	}
	if SameFile(a, b) || SameFile(a, filepath.Join(dir, "none.yaml")) {
		t.Error("different files read as one")
	}
}
