package cli

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"strconv"
	"strings"
	"testing"
)

const r18File = "../../testdata/published/resnet18.yaml"

// TestSweepAxes checks the lists and ranges the sweep's flags take
// (common practice: ranges include both ends when the steps reach them).
func TestSweepAxes(t *testing.T) {
	w, err := floatAxis("width", "0.5:2:0.25")
	if err != nil || len(w) != 7 || w[0] != 0.5 || w[6] != 2 || w[1] != 0.75 {
		t.Errorf("0.5:2:0.25 gives %v, %v", w, err)
	}
	if v, err := floatAxis("depth", "0.1:0.3:0.1"); err != nil || len(v) != 3 || v[2] != 0.3 {
		t.Errorf("0.1:0.3:0.1 gives %v, %v", v, err)
	}
	b, err := batchAxis("16:1024:x2")
	if err != nil || len(b) != 7 || b[0] != 16 || b[6] != 1024 {
		t.Errorf("16:1024:x2 gives %v, %v", b, err)
	}
	if b, err := batchAxis("32:100:32"); err != nil || len(b) != 3 || b[2] != 96 {
		t.Errorf("32:100:32 gives %v, %v", b, err)
	}
	for _, bad := range []string{"0", "1:0:1", "a,b", "4:8:x1", "-3"} {
		if _, err := batchAxis(bad); err == nil {
			t.Errorf("--batch %q accepted", bad)
		}
	}
	if _, err := floatAxis("width", "1,-1"); err == nil {
		t.Error("a negative width accepted")
	}
	if p, err := precisionAxis("all"); err != nil || len(p) != 6 {
		t.Errorf("all gives %v, %v", p, err)
	}
	if _, err := precisionAxis("fp8"); err == nil {
		t.Error("fp8 accepted")
	}
}

// TestSweepCommand runs the command in each format and checks the row
// count is the grid's, the CSV and JSON parse, and sorting orders rows.
func TestSweepCommand(t *testing.T) {
	args := []string{"sweep", r18File, "--width", "0.5,1", "--depth", "1,2", "--batch", "32:128:x2", "--precision", "fp32,bf16-mixed", "--budget", "24GiB"}
	out, errs, code := run(t, "", append(args, "--format", "csv")...)
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil || len(recs) != 1+2*2*3*2 {
		t.Fatalf("%d CSV records, %v:\n%s", len(recs), err, out)
	}
	front := 0
	for _, r := range recs[1:] {
		if r[11] == "true" {
			front++
		}
	}
	if front == 0 {
		t.Error("no row on the frontier")
	}
	out, errs, code = run(t, "", append(args, "--format", "json", "--sort", "peak", "--desc")...)
	var doc struct {
		Rows []struct {
			Peak     int64  `json:"peak_bytes"`
			MaxBatch *int64 `json:"max_batch"`
		} `json:"rows"`
		Variants int64 `json:"variants"`
	}
	if code != ExitOK || json.Unmarshal([]byte(out), &doc) != nil || len(doc.Rows) != 24 || doc.Variants != 24 {
		t.Fatalf("exit %d, %d rows: %s%s", code, len(doc.Rows), out, errs)
	}
	for i := 1; i < len(doc.Rows); i++ {
		if doc.Rows[i].Peak > doc.Rows[i-1].Peak || doc.Rows[i].MaxBatch == nil {
			t.Fatalf("row %d: peak %d after %d (descending asked)", i, doc.Rows[i].Peak, doc.Rows[i-1].Peak)
		}
	}
	out, _, code = run(t, "", append(args, "--sort", "macs", "--top", "3")...)
	if code != ExitOK || !strings.Contains(out, "memory is an estimate") || strings.Count(out, "\n0.5 ") != 3 {
		t.Errorf("exit %d, --top 3 by MACs:\n%s", code, out)
	}
	out, _, _ = run(t, "", append(args, "--frontier", "--format", "csv")...)
	if n := strings.Count(out, "\n") - 1; n != front {
		t.Errorf("--frontier writes %d rows, the full sweep marks %d", n, front)
	}
	for _, bad := range [][]string{{"--sort", "colour"}, {"--top", "3"}, {"--width", "0"}, {"--format", "xml"}, {"--desc"}} {
		if _, errs, code := run(t, "", append(args, bad...)...); code != ExitUsage || errs == "" {
			t.Errorf("%v: exit %d", bad, code)
		}
	}
	if _, errs, code := run(t, "", "sweep", r18File, "--width", "0.01:100:0.01", "--batch", "1:1000:1", "--sort", "peak"); code != ExitUsage || !strings.Contains(errs, "--top") {
		t.Errorf("an unbounded sort: exit %d, %s", code, errs)
	}
	out, _, _ = run(t, "", "sweep", "--help")
	if !strings.Contains(out, "--width 0.5:2:0.25") || !strings.Contains(out, strconv.Itoa(250)) {
		t.Errorf("help:\n%s", out)
	}
}

// TestSweepTimeColumns checks the step-time columns a device adds: in
// CSV and JSON, sorted by --sort time, in the text table's header, and
// the refusal of --sort time without a device.
func TestSweepTimeColumns(t *testing.T) {
	args := []string{"sweep", r18File, "--width", "0.5,1", "--batch", "16,256", "--precision", "fp32,bf16-mixed", "--gpu", "a100-80gb"}
	out, errs, code := run(t, "", append(args, "--format", "csv")...)
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if code != ExitOK || err != nil || len(recs) != 1+8 || recs[0][12] != "step_seconds" || recs[0][13] != "samples_per_second" {
		t.Fatalf("exit %d, %v: %s%s", code, err, out, errs)
	}
	for _, r := range recs[1:] {
		step, err1 := strconv.ParseFloat(r[12], 64)
		rate, err2 := strconv.ParseFloat(r[13], 64)
		batch, _ := strconv.ParseFloat(r[4], 64)
		if err1 != nil || err2 != nil || step <= 0 || math.Abs(rate*step-batch) > 1e-6*batch || r[9] == "" {
			t.Fatalf("row %v: step, samples/s and largest batch (the device's memory is the budget)", r)
		}
	}
	out, errs, code = run(t, "", append(args, "--format", "json", "--sort", "time", "--desc")...)
	var doc struct {
		Rows []struct {
			Step *float64 `json:"step_seconds"`
		} `json:"rows"`
	}
	if code != ExitOK || json.Unmarshal([]byte(out), &doc) != nil || len(doc.Rows) != 8 {
		t.Fatalf("exit %d: %s%s", code, out, errs)
	}
	for i, r := range doc.Rows {
		if r.Step == nil || (i > 0 && *r.Step > *doc.Rows[i-1].Step) {
			t.Fatalf("row %d: step %v, not descending", i, r.Step)
		}
	}
	out, _, code = run(t, "", args...)
	if code != ExitOK || !strings.Contains(out, "step (est)") || !strings.Contains(out, "step time is an estimate on a100-80gb") {
		t.Errorf("text table:\n%s", out)
	}
	if out, _, _ := run(t, "", "sweep", r18File, "--format", "csv"); strings.Contains(out, "step_seconds") {
		t.Errorf("time columns without a device:\n%s", out)
	}
	if _, errs, code := run(t, "", "sweep", r18File, "--sort", "time"); code != ExitUsage || !strings.Contains(errs, "--gpu") {
		t.Errorf("--sort time without a device: exit %d, %s", code, errs)
	}
}
