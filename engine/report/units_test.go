package report_test

import (
	"bytes"
	"os"
	"testing"

	"stackfit/engine"
	"stackfit/engine/report"
	"stackfit/engine/stackfile"
)

// TestUnitsReportAsWrittenOut: a stack written with units and the same
// stack written out (engine.Inline: every use a block of the unit's
// layers, saved and loaded again) give the same JSON report, byte for
// byte — rows, totals, memory and fit.
func TestUnitsReportAsWrittenOut(t *testing.T) {
	data, err := os.ReadFile("../../testdata/examples/cap-inspector-units.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	out, err := stackfile.Save(engine.Inline(s))
	if err != nil {
		t.Fatal(err)
	}
	inline, err := stackfile.Load(out)
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if len(inline.Units) != 0 || bytes.Contains(out, []byte("{unit:")) {
		t.Fatalf("the written-out file still uses units:\n%s", out)
	}
	var a, b bytes.Buffer
	for _, x := range []struct {
		s *engine.Stack
		w *bytes.Buffer
	}{{s, &a}, {inline, &b}} {
		an := engine.Analyze(x.s, x.s.Training, engine.DefaultAssumptions())
		if err := report.WriteJSON(x.w, an); err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Errorf("reports differ:\n%s\n---\n%s", a.Bytes(), b.Bytes())
	}
	// the same net written without units (testdata/examples/cap-inspector.yaml)
	plain, err := os.ReadFile("../../testdata/examples/cap-inspector.yaml")
	if err != nil {
		t.Fatal(err)
	}
	p, err := stackfile.Load(plain)
	if err != nil {
		t.Fatal(err)
	}
	rp, ru := engine.Evaluate(p), engine.Evaluate(s)
	if len(ru.Rows) != len(rp.Rows) || ru.Totals != rp.Totals || bytes.Count(a.Bytes(), []byte(`"path"`)) != len(rp.Rows) {
		t.Errorf("units: %d rows %+v; the plain file: %d rows %+v", len(ru.Rows), ru.Totals, len(rp.Rows), rp.Totals)
	}
}
