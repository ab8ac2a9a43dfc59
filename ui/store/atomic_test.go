package store

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// failing wraps the real file system and makes one step fail.
type failing struct {
	osFS
	create, rename error
	failAfter      int // bytes written before a write fails; −1 never
}

type failingFile struct {
	*os.File
	left int
}

func (f *failingFile) Write(p []byte) (int, error) {
	if f.left < 0 {
		return f.File.Write(p)
	}
	if len(p) > f.left {
		n, _ := f.File.Write(p[:f.left])
		f.left = 0
		return n, syscall.ENOSPC
	}
	f.left -= len(p)
	return f.File.Write(p)
}

func (x failing) CreateTemp(dir, pattern string) (tempFile, error) {
	if x.create != nil {
		return nil, &fs.PathError{Op: "open", Path: dir, Err: x.create}
	}
	f, err := os.CreateTemp(dir, pattern)
	if err != nil {
		return nil, err
	}
	return &failingFile{File: f, left: x.failAfter}, nil
}

func (x failing) Rename(o, n string) error {
	if x.rename != nil {
		return &os.LinkError{Op: "rename", Old: o, New: n, Err: x.rename}
	}
	return os.Rename(o, n)
}

// TestSafeSaves checks that a failed save leaves the old file
// byte-identical, removes its temporary file and says what happened.
func TestSafeSaves(t *testing.T) {
	tests := []struct {
		name string
		fsys failing
		want string
	}{
		{"read-only folder", failing{create: syscall.EACCES, failAfter: -1}, "cannot create a file in"},
		{"full disk midway", failing{failAfter: 10}, "write failed (no space left on device); is the disk full? The old file is unchanged"},
		{"interrupted rename", failing{rename: syscall.EINTR, failAfter: -1}, "rename failed"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			p := filepath.Join(dir, "net.yaml")
			old := []byte("stackfit: 1\ninput: [3, 8, 8]\nlayers: []\n")
			os.WriteFile(p, old, 0o640)
			err := writeAtomic(tt.fsys, p, func(w io.Writer) error { _, err := io.WriteString(w, strings.Repeat("new content ", 100)); return err }, 0o644)
			if err == nil || !strings.Contains(err.Error(), tt.want) || !strings.Contains(err.Error(), "net.yaml") {
				t.Fatalf("error %v, want %q", err, tt.want)
			}
			got, _ := os.ReadFile(p)
			info, _ := os.Stat(p)
			if string(got) != string(old) || info.Mode().Perm() != 0o640 {
				t.Errorf("old file changed: %q %v", got, info.Mode().Perm())
			}
			entries, _ := os.ReadDir(dir)
			if len(entries) != 1 {
				t.Errorf("left behind: %v", entries)
			}
		})
	}
}

// TestStreamedWriteFails checks that output that fails halfway, after
// more than a buffer's worth was written, leaves the old file as it was
// and says what failed.
func TestStreamedWriteFails(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "report.md")
	os.WriteFile(p, []byte("old report"), 0o644)
	err := WriteAtomic(p, 0o644, func(w io.Writer) error {
		for range 1000 {
			if _, err := io.WriteString(w, strings.Repeat("row ", 100)); err != nil {
				return err
			}
		}
		return errors.New("layer 7: cannot encode")
	})
	if err == nil || !strings.Contains(err.Error(), "layer 7: cannot encode") || !strings.Contains(err.Error(), "old file is unchanged") {
		t.Fatalf("error %v", err)
	}
	if got, _ := os.ReadFile(p); string(got) != "old report" {
		t.Errorf("old file changed: %q", got)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("left behind: %v", entries)
	}
}

// TestReadOnlyFolder uses a real read-only folder where the OS enforces it
// (not for root, who may write anywhere).
func TestReadOnlyFolder(t *testing.T) {
	if os.Geteuid() == 0 {
		t.Skip("running as root: permissions are not enforced; TestSafeSaves simulates the refusal")
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "net.yaml")
	os.WriteFile(p, []byte("old"), 0o644)
	os.Chmod(dir, 0o555)
	defer os.Chmod(dir, 0o755)
	err := WriteFileAtomic(p, []byte("new"), 0o644)
	if err == nil || !errors.Is(err, fs.ErrPermission) {
		t.Fatalf("err %v", err)
	}
	if got, _ := os.ReadFile(p); string(got) != "old" {
		t.Errorf("old file changed: %q", got)
	}
}

// TestAtomicWrite checks that a save replaces the file whole, keeps its
// permissions, and leaves the old file alone when it cannot write.
func TestAtomicWrite(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "net.yaml")
	if err := WriteFileAtomic(p, []byte("one"), 0o600); err != nil {
		t.Fatal(err)
	}
	os.Chmod(p, 0o640)
	if err := WriteFileAtomic(p, []byte("two"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, _ := os.ReadFile(p)
	info, _ := os.Stat(p)
	if string(got) != "two" || info.Mode().Perm() != 0o640 {
		t.Errorf("content %q mode %v", got, info.Mode().Perm())
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("temporary files left: %v", entries)
	}
	if err := WriteFileAtomic(filepath.Join(dir, "no-such-dir", "x.yaml"), []byte("x"), 0o644); err == nil {
		t.Error("write into a missing folder succeeded")
	}
}
