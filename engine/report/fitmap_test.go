package report

import (
	"bytes"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/charmbracelet/x/exp/golden"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// A small network with a budget tight enough that the map's corner has
// nothing that fits.
const mapStack = `stackfit: 1
name: map check
input: [3, 96, 96]
training: {batch: 32, budget: 870MiB, optimizer: adam}
layers:
  - {conv: 32, kernel: 3, stride: 2, pad: 1}
  - {norm: batch}
  - {act: relu}
  - {conv: 64, kernel: 3, pad: 1}
  - {act: relu}
  - {conv: 128, kernel: 3, stride: 2, pad: 1}
  - {act: relu}
  - global-pool
  - flatten
  - {dense: 10}
`

func analyzeText(t *testing.T, src string) (*engine.Analysis, string) {
	t.Helper()
	s, err := stackfile.Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	var b bytes.Buffer
	if err := WriteText(&b, an); err != nil {
		t.Fatal(err)
	}
	return an, b.String()
}

// TestTextFitMap: with a budget the text report ends its memory part with
// the map, 80 columns wide at most, the stack's own cell marked with its
// largest batch, and a legend that says it is an estimate.
func TestTextFitMap(t *testing.T) {
	an, out := analyzeText(t, mapStack)
	i := strings.Index(out, "\nlargest batch that fits")
	if i < 0 {
		t.Fatalf("no fit map in the report:\n%s", out)
	}
	part := out[i+1:]
	if j := strings.Index(part, "\n\n"); j >= 0 {
		part = part[:j+1]
	}
	for _, l := range strings.Split(part, "\n") {
		if n := utf8.RuneCountInString(l); n > 80 {
			t.Errorf("line of %d columns: %q", n, l)
		}
	}
	if !strings.Contains(part, "estimate") {
		t.Error("the map does not say it is an estimate")
	}
	want := FitMapCurrentMark + engine.FitMapBatch(an.Fit.MaxBatch)
	if strings.Count(part, FitMapCurrentMark) != 2 || !strings.Contains(part, want) { // the cell and the legend
		t.Errorf("the stack's cell %q is not marked once:\n%s", want, part)
	}
	golden.RequireEqual(t, []byte(part)) // testdata/TestTextFitMap.golden
}

// TestTextFitMapNeedsBudget: without a budget there is nothing to fit.
func TestTextFitMapNeedsBudget(t *testing.T) {
	_, out := analyzeText(t, strings.Replace(mapStack, ", budget: 870MiB", "", 1))
	if strings.Contains(out, "largest batch that fits") {
		t.Errorf("a map without a budget:\n%s", out)
	}
}
