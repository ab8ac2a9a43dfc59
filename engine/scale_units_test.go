package engine_test

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// unitsScaleFile has a unit whose width is a parameter passed on through a
// nested use (c), one with a literal width (the 1×1 expansion to 96), a
// grouped convolution whose width is rounded to its groups as well, a
// parameter default that is a width, and a dense head outside the units
// (the last weighted layer, which keeps its width: the task's classes).
const unitsScaleFile = `stackfit: 1
input: [3, 64, 64]
units:
  cbr:
    params: {c: 16, g: 1}
    layers:
      - {conv: $c, kernel: 3, pad: 1, groups: $g, bias: false}
      - {norm: batch}
      - {act: relu}
  mix:
    params: {c: ~}
    layers:
      - {unit: cbr, c: $c}
      - {conv: 96, kernel: 1}
      - {unit: cbr, c: 48, g: 3}
layers:
  - {unit: cbr}
  - {unit: mix, c: 24, repeat: 2}
  - {unit: cbr, c: 40}
  - global-pool
  - flatten
  - {dense: 10}
`

// TestScaleWidthKeepsUnits: a width multiplier applied to a stack written
// with units (Howard et al. 2017's width multiplier, rounded as
// MobileNetV2's code rounds: ScaleChannels) gives the stack that scaling
// the written-out stack gives, row for row, and the file keeps its units:
// the uses' arguments, the parameters' defaults and the units' literal
// widths carry the scaling. Where the units cannot carry it (the last
// weighted layer, which keeps its width, inside a unit used more than
// once), the stack is written out instead, still exact.
func TestScaleWidthKeepsUnits(t *testing.T) {
	capUnits, err := os.ReadFile(filepath.Join("..", "testdata", "examples", "cap-inspector-units.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	// the last weighted layer, which keeps its width, is mix's literal
	// 48 in the second use: the first use's would double
	lastInUnit := unitsScaleFile[:strings.Index(unitsScaleFile, "layers:\n  - {unit: cbr}")] + "layers:\n  - {unit: mix, c: 24}\n  - {unit: mix, c: 32}\n"
	tests := []struct {
		name      string
		file      string
		factor    float64
		keepUnits bool
		want      []string // in the saved file
	}{
		{"cap inspector ×2", string(capUnits), 2, true, []string{"{unit: cbr, c: 64, s: 2}", "{unit: basic, c: 128, s: 2}", "{dense: 3, name: verdict}"}},
		{"cap inspector ×0.5", string(capUnits), 0.5, true, []string{"{unit: cbr, c: 16, s: 2}", "{unit: basic, c: 16}", "{unit: basic, c: 32, s: 2}"}},
		{"nested widths ×1.5", unitsScaleFile, 1.5, true, []string{"params: {c: 24, g: 1}", "{conv: 144, kernel: 1}", "{unit: cbr, c: 72, g: 3}", "{unit: mix, c: 40, repeat: 2}", "{unit: cbr, c: 64}", "{dense: 10}"}},
		{"nested widths ×0.25", unitsScaleFile, 0.25, true, []string{"params: {c: 8, g: 1}", "{conv: 24, kernel: 1}", "{unit: cbr, c: 24, g: 3}", "{unit: mix, c: 8, repeat: 2}"}},
		{"the last weighted layer inside a unit used twice", lastInUnit, 2, false, []string{"{conv: 96, kernel: 3, pad: 1, groups: 3, bias: false}", "{conv: 48, kernel: 3, pad: 1, groups: 3, bias: false}"}},
		{"the last weighted layer inside a unit's one use", unitsScaleFile[:strings.Index(unitsScaleFile, "  - global-pool")], 2, true, []string{"{unit: cbr, c: 40}"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := stackfile.Load([]byte(tt.file))
			if err != nil {
				t.Fatal(err)
			}
			got, err := engine.ScaleWidth(s, tt.factor, 8)
			if err != nil {
				t.Fatal(err)
			}
			want, err := engine.ScaleWidth(engine.Inline(s), tt.factor, 8)
			if err != nil {
				t.Fatal(err)
			}
			if (len(got.Units) > 0) != tt.keepUnits {
				t.Fatalf("units kept: %v, want %v", len(got.Units) > 0, tt.keepUnits)
			}
			// what the file says, read back, is what the scaled written-out stack computes
			data, err := stackfile.Save(got)
			if err != nil {
				t.Fatal(err)
			}
			back, err := stackfile.Load(data)
			if err != nil {
				t.Fatalf("%v\n%s", err, data)
			}
			rb, rw := engine.Evaluate(back), engine.Evaluate(want)
			if rb.Errors != 0 || rb.Totals != rw.Totals || len(rb.Rows) != len(rw.Rows) {
				t.Fatalf("saved and read back: %+v (%d rows, %v), written out and scaled: %+v (%d rows)\n%s", rb.Totals, len(rb.Rows), rb.Diags, rw.Totals, len(rw.Rows), data)
			}
			for i := range rb.Rows {
				if a, b := rb.Rows[i], rw.Rows[i]; a.Out != b.Out || a.Params != b.Params {
					t.Errorf("row %s: %v %d params, want %v %d", a.Path, a.Out, a.Params, b.Out, b.Params)
				}
			}
			if r := engine.Evaluate(s); rb.Totals.Params == r.Totals.Params {
				t.Errorf("the scaling changed nothing: %d params", r.Totals.Params)
			}
			for _, w := range tt.want {
				if !strings.Contains(string(data), w) {
					t.Errorf("the file lacks %q:\n%s", w, data)
				}
			}
		})
	}
}

// TestUnitUnusedWarning: a unit no layer uses (nor any unit a layer uses)
// is a warning under units:, which quiet: silences (common practice: a
// dead definition is kept by mistake more often than on purpose).
func TestUnitUnusedWarning(t *testing.T) {
	const file = `stackfit: 1
input: [3, 16, 16]
units:
  cb:
    params: {c: 8}
    layers: [{conv: $c, kernel: 3, pad: 1}]
  pair:
    layers: [{unit: cb}, {unit: cb}]
  spare:
    layers: [{unit: cb, c: 16}]
layers:
  - {unit: pair}
`
	s, err := stackfile.Load([]byte(file))
	if err != nil {
		t.Fatal(err)
	}
	r := engine.Evaluate(s)
	var got []string
	for _, d := range r.Diags {
		if d.Code == engine.WarnUnitUnused {
			got = append(got, r.Describe(d))
		}
	}
	want := "units: unit spare is defined but no layer uses it; add a use ({unit: spare, …}) or remove it from units:"
	if len(got) != 1 || got[0] != want || r.Warnings < 1 {
		t.Errorf("warnings %q, want one %q", got, want)
	}
	s.Quiet = append(s.Quiet, engine.WarnUnitUnused)
	if r := engine.Evaluate(s); slices.ContainsFunc(r.Diags, func(d engine.Diagnostic) bool { return d.Code == engine.WarnUnitUnused }) {
		t.Error("quiet: [unit-unused] does not silence it")
	}
}
