package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
	"stackfit/ui/store"
)

// TestRecoveryOffers: a journal of the file as it is on disk is offered
// in place; after the file changed on disk it is offered only under a new
// name, and the question says why; one equal to the file is removed.
func TestRecoveryOffers(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "grader.yaml")
	data := examples.FruitGrader()
	os.WriteFile(file, data, 0o644)
	s, _ := stackfile.Load(data)
	edited := s.Clone()
	edited.Layers = edited.Layers[:4]

	j := store.JournalFor(file, dir)
	j.Path += "-crashed" // another session's file: FindJournals skips only our own
	j.Rebase(data)
	j.Record(edited)
	r, notice := recovery(file, dir, data, s, false)
	if r == nil || r.AsNew != "" || len(r.Stack.Layers) != 4 || notice != "" {
		t.Fatalf("trusted journal: %+v %q", r, notice)
	}

	newer := append(append([]byte(nil), data...), "# edited elsewhere\n"...)
	r, _ = recovery(file, dir, newer, s, false)
	if r == nil || r.AsNew != filepath.Join(dir, "grader.recovered.yaml") || !strings.Contains(r.About, "newer") {
		t.Fatalf("stale journal: %+v", r)
	}
	if err := r.Discard(); err != nil {
		t.Fatal(err)
	}

	j.Record(s) // equal to the file: nothing to offer, and it goes
	if r, _ := recovery(file, dir, data, s, false); r != nil {
		t.Errorf("offered a journal equal to the file: %+v", r)
	}
	if _, err := os.Stat(j.Path); !os.IsNotExist(err) {
		t.Error("an unneeded journal was kept")
	}
}
