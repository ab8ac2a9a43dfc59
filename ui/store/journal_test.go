package store

import (
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
)

// session writes a journal as another (finished or running) session
// with process id pid would, for file as it held base.
func session(t *testing.T, file string, pid int, base []byte, s *engine.Stack) string {
	t.Helper()
	j := JournalFor(file, t.TempDir())
	j.Path = journalPrefix(file) + "." + strconv.Itoa(pid)
	j.Rebase(base)
	if err := j.Record(s); err != nil {
		t.Fatal(err)
	}
	// Record writes this process's id; put the session's in its place.
	data, _ := os.ReadFile(j.Path)
	data = []byte(strings.Replace(string(data), "# pid: "+strconv.Itoa(os.Getpid()), "# pid: "+strconv.Itoa(pid), 1))
	os.WriteFile(j.Path, data, 0o600)
	return j.Path
}

// deadPID returns the id of a process that has ended.
func deadPID(t *testing.T) int {
	t.Helper()
	cmd := exec.Command("true")
	if err := cmd.Run(); err != nil {
		t.Skip("cannot run a process:", err)
	}
	return cmd.Process.Pid
}

func TestJournalPerSession(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "net.yaml")
	data, _ := stackfile.Save(mustLoad(t))
	os.WriteFile(file, data, 0o644)
	j := JournalFor(file, dir)
	if want := filepath.Join(dir, ".net.yaml.unsaved."+strconv.Itoa(os.Getpid())); j.Path != want {
		t.Errorf("journal path %s, want %s", j.Path, want)
	}
	edited := mustLoad(t)
	edited.Layers = edited.Layers[:3]

	// A finished session's whole journal of this file, made on its
	// current content: trusted.
	dead := session(t, file, deadPID(t), data, edited)
	found := FindJournals(file, dir, data)
	if len(found) != 1 || !found[0].Trusted() || found[0].Live || len(found[0].Stack.Layers) != 3 {
		t.Fatalf("found %+v", found)
	}
	// Our own journal is never offered to ourselves, and clearing it
	// leaves the other session's alone.
	j.Rebase(data)
	j.Record(edited)
	if got := FindJournals(file, dir, data); len(got) != 1 || got[0].Path != dead {
		t.Errorf("own journal offered: %+v", got)
	}
	j.Clear()
	if _, err := os.Stat(dead); err != nil {
		t.Errorf("clearing our journal removed another session's: %v", err)
	}

	// A running session holds its lock: live, not offered; with nothing
	// unsaved it is still seen. Once it ends, its lock is cleaned up.
	os.Remove(dead)
	other := &Journal{Path: journalPrefix(file) + ".4242", For: file}
	if err := other.Hold(); err != nil {
		t.Fatal(err)
	}
	if got := FindJournals(file, dir, data); len(got) != 1 || !got[0].Live || got[0].Stack != nil || got[0].PID != 4242 {
		t.Errorf("live session without edits: %+v", got)
	}
	session(t, file, 4242, data, edited)
	if got := FindJournals(file, dir, data); len(got) != 1 || !got[0].Live || got[0].Stack == nil {
		t.Errorf("live session with edits: %+v", got)
	}
	other.Release() // the session ends with edits unsaved (a crash releases the lock the same way)
	if got := FindJournals(file, dir, data); len(got) != 1 || got[0].Live || !got[0].Trusted() {
		t.Errorf("ended session: %+v", got)
	}

	// A clean quit (edits saved: the journal cleared) leaves nothing
	// beside the file.
	os.Remove(other.Path)
	os.Remove(other.Path + lockSuffix)
	if err := j.Hold(); err != nil {
		t.Fatal(err)
	}
	j.Record(edited)
	j.Clear()
	j.Release()
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("a clean quit left %v", entries)
	}
}

func TestJournalDistrust(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "net.yaml")
	data, _ := stackfile.Save(mustLoad(t))
	os.WriteFile(file, data, 0o644)
	edited := mustLoad(t)
	pid := deadPID(t)

	// Cut short at a line end: it still parses, but is not complete.
	p := session(t, file, pid, data, edited)
	whole, _ := os.ReadFile(p)
	lines := strings.SplitAfter(string(whole), "\n")
	os.WriteFile(p, []byte(strings.Join(lines[:len(lines)*2/3], "")), 0o600) // a third of the layers gone
	f := FindJournals(file, dir, data)[0]
	if f.Err != nil || f.Complete || f.Trusted() {
		t.Errorf("a truncated journal is trusted: %+v", f)
	}
	if !strings.Contains(f.Describe(), "incomplete") {
		t.Errorf("describe: %s", f.Describe())
	}
	os.Remove(p)

	// Made before the file changed on disk: stale, and said so.
	session(t, file, pid, data, edited)
	newer := append(append([]byte(nil), data...), "# a later change\n"...)
	f = FindJournals(file, dir, newer)[0]
	if !f.Stale || f.Trusted() || !strings.Contains(f.Describe(), "newer") {
		t.Errorf("stale journal: %+v, %s", f, f.Describe())
	}
	os.Remove(f.Path)

	// Written for another file and copied here: foreign.
	other := filepath.Join(dir, "other.yaml")
	os.WriteFile(other, data, 0o644)
	op := session(t, other, pid, data, edited)
	os.Rename(op, journalPrefix(file)+"."+strconv.Itoa(pid))
	f = FindJournals(file, dir, data)[0]
	if !f.Foreign || f.Trusted() || !strings.Contains(f.Describe(), "another file") {
		t.Errorf("foreign journal: %+v", f)
	}
	os.Remove(f.Path)

	// Damaged: an error, left in place.
	bad := journalPrefix(file) + ".7"
	os.WriteFile(bad, []byte("stackfit: [\x00"), 0o600)
	f = FindJournals(file, dir, data)[0]
	if f.Err == nil || !strings.Contains(f.Err.Error(), "left in place") {
		t.Errorf("damaged: %+v", f)
	}
	if _, err := os.Stat(bad); err != nil {
		t.Error("a damaged journal was removed")
	}
}

func mustLoad(t *testing.T) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load(examples.FruitGrader())
	if err != nil {
		t.Fatal(err)
	}
	return s
}
