package examples

import (
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// TestExamplesLoadClean requires every built-in example to load, evaluate
// without errors or warnings, fit its own budget and save back to the
// bytes shipped (the canonical form, so that editing one starts clean).
func TestExamplesLoadClean(t *testing.T) {
	for _, e := range All() {
		t.Run(e.Name, func(t *testing.T) {
			s, err := stackfile.Load(e.Data())
			if err != nil {
				t.Fatal(err)
			}
			an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
			if r := an.Result; r.Errors+r.Warnings != 0 {
				t.Errorf("%d errors, %d warnings: %v", r.Errors, r.Warnings, r.Diags)
			}
			if !an.Memory.Fits {
				t.Errorf("does not fit its own budget: %d of %d bytes", an.Memory.Total, an.Memory.Budget)
			}
			if out, err := stackfile.Save(s); err != nil || string(out) != string(e.Data()) {
				t.Errorf("not in canonical form (err %v):\n%s", err, out)
			}
			if _, ok := Find(e.Name); !ok {
				t.Errorf("Find(%q) fails", e.Name)
			}
		})
	}
}

// TestBoardExampleIsMobile holds the camera-board example to what it
// claims: the mobile family's constructs, and small enough for an edge
// board — under a million parameters and 100M MACs per 128×128 crop (a
// budget chosen for this example, not a published figure).
func TestBoardExampleIsMobile(t *testing.T) {
	e, _ := Find("fruit-grader-board")
	s, err := stackfile.Load(e.Data())
	if err != nil {
		t.Fatal(err)
	}
	r := engine.Evaluate(s)
	roles := map[engine.Role]bool{}
	relative := false
	for _, row := range r.Rows {
		roles[row.Role] = true
		relative = relative || !row.Layer.Rel.IsZero()
	}
	for _, want := range []engine.Role{engine.RoleGate, engine.RoleResidual, engine.RoleJoin} {
		if !roles[want] {
			t.Errorf("no %s row", want)
		}
	}
	if !relative {
		t.Error("no relative width")
	}
	if r.Totals.Params >= 1_000_000 || r.Totals.MACs >= 100_000_000 {
		t.Errorf("%d parameters, %d MACs: too big for the board", r.Totals.Params, r.Totals.MACs)
	}
}

// TestCapExampleUsesUnits holds the cap-inspector example to what it
// shows: units used by name (one nested in another, a stage's repeats a
// parameter), a spatial gate, and rows that are those of the same stack
// written out (engine.Inline), count for count.
func TestCapExampleUsesUnits(t *testing.T) {
	e, _ := Find("cap-inspector")
	s, err := stackfile.Load(e.Data())
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Units) != 2 || s.Layers[1].Unit != "stage" || s.Layers[1].Body[0].Body[0].Unit != "cna" {
		t.Fatalf("units %d, stage1 %+v", len(s.Units), s.Layers[1])
	}
	r, w := engine.Evaluate(s), engine.Evaluate(engine.Inline(s))
	if r.Totals != w.Totals || len(r.Rows) != len(w.Rows) {
		t.Errorf("with units %+v (%d rows), written out %+v (%d rows)", r.Totals, len(r.Rows), w.Totals, len(w.Rows))
	}
	gate := false
	for _, row := range r.Rows {
		gate = gate || row.Layer.Kind == engine.KindSpatialGate
	}
	if !gate {
		t.Error("no spatial gate")
	}
}
