package store

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
)

func TestJournal(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "net.yaml")
	j := JournalFor(file, dir)
	if j.Path != filepath.Join(dir, ".net.yaml.unsaved") {
		t.Errorf("journal path %s", j.Path)
	}
	s, _ := stackfile.Load(examples.FruitGrader())
	if r, err := j.Check(s); r != nil || err != nil {
		t.Fatalf("no journal yet: %v %v", r, err)
	}
	edited := s.Clone()
	edited.Layers = edited.Layers[:3]
	if err := j.Record(edited); err != nil {
		t.Fatal(err)
	}
	r, err := j.Check(s)
	if err != nil || r == nil || len(r.Stack.Layers) != 3 {
		t.Fatalf("recovered %+v %v", r, err)
	}
	// The same stack as the file: nothing to offer, and the journal goes.
	j.Record(s)
	if r, _ := j.Check(s); r != nil {
		t.Error("offered a journal equal to the file")
	}
	if _, err := os.Stat(j.Path); !os.IsNotExist(err) {
		t.Error("an unneeded journal was kept")
	}
	// A damaged journal is reported and left alone.
	os.WriteFile(j.Path, []byte("stackfit: [\x00"), 0o600)
	if _, err := j.Check(s); err == nil || !strings.Contains(err.Error(), "damaged and was left in place") {
		t.Errorf("damaged journal: %v", err)
	}
	if err := j.Clear(); err != nil {
		t.Error(err)
	}
	if err := j.Clear(); err != nil {
		t.Error("clearing twice failed")
	}
	u := JournalFor("", dir)
	if u.Path != filepath.Join(dir, "untitled.unsaved") {
		t.Errorf("untitled journal %s", u.Path)
	}
	if err := u.Record(&engine.Stack{Input: engine.Shape{C: 1, H: 1, W: 1}}); err != nil {
		t.Error(err)
	}
}
