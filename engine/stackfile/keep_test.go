package stackfile

import (
	"os"
	"strings"
	"testing"

	"stackfit/engine"
)

const commented = `# A fruit grader for the sorting line.
# Second line of the head comment.
stackfit: 1
name: grader   # the short name
input: [3, 64, 64]
training:
  batch: 64        # what fits today
  budget: 8GiB
layers:
  # the stem
  - {conv: 16, kernel: 3, stride: 2, pad: 1}
  - {norm: batch}   # keep batch norm
  - {act: relu}
  - block: 2
    # two residual repeats
    residual: true
    layers:
      - {conv: 16, kernel: 3, pad: 1}   # inner conv
      - {act: relu}
  - fork: copy
    branches:
      - [{conv: 8, kernel: 1}]   # left
      - - {conv: 8, kernel: 3, pad: 1}   # right
  # the head
  - global-pool
  - {dense: 5}   # five grades
`

// TestSaveOverUnchanged: a stack saved with no edit gives the file back
// byte for byte, comments, order and spacing included.
func TestSaveOverUnchanged(t *testing.T) {
	for _, data := range []string{commented, readPublished(t, "resnet50.yaml"), readPublished(t, "googlenet.yaml")} {
		s, err := Load([]byte(data))
		if err != nil {
			t.Fatal(err)
		}
		out, err := SaveOver([]byte(data), s)
		if err != nil || string(out) != data {
			t.Errorf("an unchanged stack did not save back byte-identical (err %v):\n%s", err, out)
		}
	}
}

func readPublished(t *testing.T, name string) string {
	t.Helper()
	data, err := os.ReadFile("../../testdata/published/" + name)
	if err != nil {
		t.Fatal(err)
	}
	return string(data)
}

// TestSaveOverKeepsComments edits, inserts and deletes layers and checks
// that every comment of what still exists survives, a deleted layer's
// goes, and the result loads back as the edited stack.
func TestSaveOverKeepsComments(t *testing.T) {
	s, err := Load([]byte(commented))
	if err != nil {
		t.Fatal(err)
	}
	s.Layers[0].Filters = 24                                                                                                  // edit the stem
	s.Layers = append(s.Layers[:2], s.Layers[3:]...)                                                                          // delete the relu
	s.Layers = append(s.Layers[:1], append([]engine.Layer{{Kind: engine.KindAct, Act: engine.ActReLU6}}, s.Layers[1:]...)...) // insert after the stem
	s.Layers[3].Repeat = 3                                                                                                    // the block
	s.Layers[3].Body[0].Filters = 32                                                                                          // its conv
	s.Training.Batch = 128
	out, err := SaveOver([]byte(commented), s)
	if err != nil {
		t.Fatal(err)
	}
	text := string(out)
	for _, want := range []string{"# A fruit grader for the sorting line.", "# Second line of the head comment.", "# the short name",
		"# what fits today", "# the stem", "# keep batch norm", "# two residual repeats", "# inner conv", "# left", "# right",
		"# the head", "# five grades", "conv: 24", "relu6", "block: 3", "conv: 32", "batch: 128"} {
		if !strings.Contains(text, want) {
			t.Errorf("lost %q:\n%s", want, text)
		}
	}
	back, err := Load(out)
	if err != nil {
		t.Fatalf("does not load: %v\n%s", err, out)
	}
	a, _ := Save(back)
	b, _ := Save(s)
	if string(a) != string(b) {
		t.Errorf("reloads as another stack:\n%s\n---\n%s", a, b)
	}
	// Deleting the commented layer drops its comment.
	s.Layers = s.Layers[:len(s.Layers)-1]
	out, _ = SaveOver([]byte(commented), s)
	if strings.Contains(string(out), "five grades") {
		t.Errorf("a deleted layer's comment stayed:\n%s", out)
	}
}

// TestSaveOverNoBase: without an old file (or with one that does not
// load) the canonical form is written.
func TestSaveOverNoBase(t *testing.T) {
	s, _ := Load([]byte(commented))
	want, _ := Save(s)
	for _, old := range []string{"", "not: [a stack"} {
		if out, err := SaveOver([]byte(old), s); err != nil || string(out) != string(want) {
			t.Errorf("old %q: got %s (%v)", old, out, err)
		}
	}
}
