package store

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"stackfit/engine"
)

const commentedStack = "# my grader\nstackfit: 1\ninput: [3, 32, 32]\nlayers:\n  - {conv: 8, kernel: 3}   # the stem\n  - {act: relu}\n"

// write puts data in a new file under dir and returns its path.
func write(t *testing.T, dir, name, data string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestSaveRefusesUnreadChanges: a save over a file that changed since it
// was read (another editor's save, a checkout, an append) is refused with
// ErrChanged and leaves the file as it is; so is a save that would
// replace a file never read. With Overwrite it goes ahead.
func TestSaveRefusesUnreadChanges(t *testing.T) {
	dir := t.TempDir()
	p := write(t, dir, "net.yaml", commentedStack)
	s, base, err := Disk{}.Load(p)
	if err != nil {
		t.Fatal(err)
	}
	outside := commentedStack + "  - {dense: 4}\n"
	if err := os.WriteFile(p, []byte(outside), 0o644); err != nil {
		t.Fatal(err)
	}
	s.Layers[0].Filters = 16
	if _, _, err := (Disk{}).Save(p, s, base, SaveMode{}); !errors.Is(err, ErrChanged) {
		t.Fatalf("saved over an outside change: %v", err)
	}
	if data, _ := os.ReadFile(p); string(data) != outside {
		t.Fatalf("the outside change was lost:\n%s", data)
	}
	if _, _, err := (Disk{}).Save(p, s, nil, SaveMode{}); !errors.Is(err, ErrChanged) {
		t.Errorf("replaced a file it never read: %v", err)
	}
	if _, _, err := (Disk{}).Save(p, s, base, SaveMode{Overwrite: true}); err != nil {
		t.Fatalf("overwrite: %v", err)
	}
	if data, _ := os.ReadFile(p); !strings.Contains(string(data), "conv: 16") || !strings.Contains(string(data), "# the stem") {
		t.Errorf("overwrite wrote:\n%s", data)
	}
}

// TestSaveKeepsFileAndComments: a save with no edit leaves the file byte
// for byte; an edit keeps the comments.
func TestSaveKeepsFileAndComments(t *testing.T) {
	p := write(t, t.TempDir(), "net.yaml", commentedStack)
	s, base, _ := Disk{}.Load(p)
	data, _, err := Disk{}.Save(p, s, base, SaveMode{})
	if err != nil || string(data) != commentedStack {
		t.Fatalf("unchanged save wrote %q (%v)", data, err)
	}
	s.Layers = append(s.Layers, engine.Layer{Kind: engine.KindGlobalPool})
	data, _, err = Disk{}.Save(p, s, data, SaveMode{})
	if err != nil || !strings.Contains(string(data), "# my grader") || !strings.Contains(string(data), "# the stem") {
		t.Errorf("edited save lost comments (%v):\n%s", err, data)
	}
}

// TestSaveThroughSymlink writes the link's target and keeps the link.
func TestSaveThroughSymlink(t *testing.T) {
	dir := t.TempDir()
	target := write(t, dir, "real.yaml", commentedStack)
	link := filepath.Join(dir, "link.yaml")
	if err := os.Symlink("real.yaml", link); err != nil {
		t.Fatal(err)
	}
	s, base, err := Disk{}.Load(link)
	if err != nil {
		t.Fatal(err)
	}
	s.Layers[0].Filters = 24
	if _, _, err := (Disk{}).Save(link, s, base, SaveMode{}); err != nil {
		t.Fatal(err)
	}
	if info, err := os.Lstat(link); err != nil || info.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the link was replaced: %v %v", info.Mode(), err)
	}
	if data, _ := os.ReadFile(target); !strings.Contains(string(data), "conv: 24") {
		t.Errorf("the target was not written:\n%s", data)
	}
}

// TestSaveReadOnlyAndHardLinks: a file without write permission is
// refused unless asked (and keeps its mode); a hard-linked file is
// reported. Root may write anything; the mode without write bits still
// marks the file read-only for it.
func TestSaveReadOnlyAndHardLinks(t *testing.T) {
	dir := t.TempDir()
	p := write(t, dir, "net.yaml", commentedStack)
	s, base, _ := Disk{}.Load(p)
	s.Layers[0].Filters = 32
	{
		os.Chmod(p, 0o444)
		if _, _, err := (Disk{}).Save(p, s, base, SaveMode{}); !errors.Is(err, ErrReadOnly) {
			t.Errorf("wrote a read-only file: %v", err)
		}
		data, _, err := Disk{}.Save(p, s, base, SaveMode{ReadOnly: true})
		if err != nil {
			t.Fatal(err)
		}
		if info, _ := os.Stat(p); info.Mode().Perm() != 0o444 {
			t.Errorf("mode became %v", info.Mode().Perm())
		}
		base = data
		os.Chmod(p, 0o644)
	}
	if err := os.Link(p, filepath.Join(dir, "other.yaml")); err != nil {
		t.Fatal(err)
	}
	s.Layers[0].Filters = 40
	_, note, err := Disk{}.Save(p, s, base, SaveMode{})
	if err != nil || !strings.Contains(note, "2 hard links") {
		t.Errorf("hard link not reported: %q %v", note, err)
	}
}

// TestSaveKeepsOwner: a save keeps the file's owner and group where the
// process may set them (as root, which is how the owner used to change).
func TestSaveKeepsOwner(t *testing.T) {
	if os.Getuid() != 0 {
		t.Skip("only root can give a file to another owner")
	}
	p := write(t, t.TempDir(), "net.yaml", commentedStack)
	if err := os.Chown(p, 1234, 2345); err != nil {
		t.Fatal(err)
	}
	s, base, _ := Disk{}.Load(p)
	s.Layers[0].Filters = 16
	if _, _, err := (Disk{}).Save(p, s, base, SaveMode{}); err != nil {
		t.Fatal(err)
	}
	info, _ := os.Stat(p)
	if st := info.Sys().(*syscall.Stat_t); st.Uid != 1234 || st.Gid != 2345 {
		t.Errorf("owner became %d:%d", st.Uid, st.Gid)
	}
}
