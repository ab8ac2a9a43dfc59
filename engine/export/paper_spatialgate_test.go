package export

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport"
	"stackfit/engine/stackfile"
)

// spatialGateReply is one answer line of testdata/papers/spatialgate.py.
type spatialGateReply struct {
	Op    string `json:"op"`
	Error string `json:"error"`
	Rows  []struct {
		Path    string   `json:"path"`
		Out     [3]int64 `json:"out"`
		Params  int64    `json:"params"`
		Buffers int64    `json:"buffers"`
	} `json:"rows"`
	Params         int64   `json:"params"`
	Buffers        int64   `json:"buffers"`
	SavedPerSample int64   `json:"saved_per_sample"`
	Eval           float64 `json:"eval"`
	Train          float64 `json:"train"`
	Scale          float64 `json:"scale"`
}

// TestPaperSpatialGate holds the spatial gate (Woo et al. 2018, CBAM's
// spatial attention, equation 3, in basic residual blocks before the
// addition as in its Figure 3) to a PyTorch module written from the paper
// (testdata/papers/spatialgate.py, Debian's python3-torch 1.13) and the
// same network as a stack file (testdata/papers/spatial-gate-residual.yaml):
// every row's path, shape, parameters and buffers, the totals, and the
// bytes autograd keeps per sample (saved_tensors_hooks, each storage once,
// as testdata/reference measures them; fp32, CPU: 8-byte indices) exactly;
// the exported module given the paper module's weights computes the same
// outputs in eval and train mode (to fp32 rounding: 1e-5 of the output's
// scale); and the paper module exported to ONNX at opsets 13 and 17 (train
// mode, batch norms kept) imports back with the same parameters, buffers,
// MACs and rows.
func TestPaperSpatialGate(t *testing.T) {
	needReference(t)
	t.Parallel()
	data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "papers", "spatial-gate-residual.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	module, an := exportFile(t, s, dir, "spatial-gate-residual")
	r := an.Result
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	jobs := []map[string]any{{"op": "reference"}, {"op": "equal", "module": module}}
	for _, opset := range []int{13, 17} {
		jobs = append(jobs, map[string]any{"op": "onnx", "opset": opset, "path": filepath.Join(dir, fmt.Sprintf("gate-%d.onnx", opset))})
	}
	var in bytes.Buffer
	for _, j := range jobs {
		if err := json.NewEncoder(&in).Encode(j); err != nil {
			t.Fatal(err)
		}
	}
	cmd := exec.Command(python, filepath.Join("..", "..", "testdata", "papers", "spatialgate.py"))
	cmd.Stdin = &in
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("spatialgate.py: %v\n%s", err, stderr.String())
	}
	dec := json.NewDecoder(bytes.NewReader(out))
	var replies []spatialGateReply
	for dec.More() {
		var rep spatialGateReply
		if err := dec.Decode(&rep); err != nil {
			t.Fatal(err)
		}
		if rep.Error != "" {
			t.Fatalf("%s: %s", rep.Op, rep.Error)
		}
		replies = append(replies, rep)
	}
	if len(replies) != len(jobs) {
		t.Fatalf("%d answers to %d jobs\n%s", len(replies), len(jobs), stderr.String())
	}

	ref := replies[0]
	if len(ref.Rows) != len(r.Rows) {
		t.Errorf("PyTorch has %d rows, the engine %d", len(ref.Rows), len(r.Rows))
	}
	for i := range min(len(ref.Rows), len(r.Rows)) {
		row, want := &r.Rows[i], ref.Rows[i]
		got := [3]int64{row.Out.C, row.Out.H, row.Out.W}
		if row.Path.String() != want.Path || got != want.Out || row.Params != want.Params || row.Buffers != want.Buffers {
			t.Errorf("row %s (%s): %v params %d buffers %d; PyTorch %s %v params %d buffers %d",
				row.Path, engine.RowSummary(row), got, row.Params, row.Buffers, want.Path, want.Out, want.Params, want.Buffers)
		}
	}
	if r.Totals.Params != ref.Params || r.Totals.Buffers != ref.Buffers {
		t.Errorf("totals: %d params %d buffers; PyTorch %d and %d", r.Totals.Params, r.Totals.Buffers, ref.Params, ref.Buffers)
	}
	var m engine.Memory
	r.Memory(engine.Training{Batch: 1}, engine.Assumptions{MaskBytes: 4, IndexBytes: 8}, &m)
	if m.ActPerSample != ref.SavedPerSample {
		t.Errorf("kept for backward: %d bytes per sample; PyTorch's autograd %d", m.ActPerSample, ref.SavedPerSample)
	}

	eq := replies[1]
	t.Logf("PyTorch: %d rows, %d params, %d buffers, %d bytes kept per sample; export max |Δ| %g (eval), %g (train) on outputs up to %g",
		len(ref.Rows), ref.Params, ref.Buffers, ref.SavedPerSample, eq.Eval, eq.Train, eq.Scale)
	if tol := 1e-5 * max(eq.Scale, 1); eq.Eval > tol || eq.Train > tol || eq.Scale == 0 {
		t.Errorf("the exported module differs from the paper's: max |Δ| %g in eval mode, %g in train mode (outputs up to %g)", eq.Eval, eq.Train, eq.Scale)
	}

	for _, j := range jobs[2:] {
		t.Run(fmt.Sprintf("onnx opset %d", j["opset"]), func(t *testing.T) {
			data, err := os.ReadFile(j["path"].(string))
			if err != nil {
				t.Fatal(err)
			}
			is, _, err := onnximport.Import(data, "gate")
			if err != nil {
				t.Fatal(err)
			}
			ir := engine.Evaluate(is)
			if ir.Errors != 0 {
				t.Fatal(ir.Diags)
			}
			if ir.Totals != r.Totals || len(ir.Rows) != len(r.Rows) || ir.Output != r.Output {
				t.Errorf("imported: %+v, %d rows, output %v; the stack file %+v, %d rows, output %v",
					ir.Totals, len(ir.Rows), ir.Output, r.Totals, len(r.Rows), r.Output)
			}
			for i := range min(len(ir.Rows), len(r.Rows)) {
				a, b := &ir.Rows[i], &r.Rows[i]
				if a.Out != b.Out || a.Params != b.Params || a.Buffers != b.Buffers || a.MACs != b.MACs || a.Layer.Kind != b.Layer.Kind {
					t.Errorf("row %d: imported %s %v, the stack file %s %v", i+1, engine.RowSummary(a), a.Out, engine.RowSummary(b), b.Out)
				}
			}
			var im engine.Memory
			ir.Memory(engine.Training{Batch: 1}, engine.Assumptions{MaskBytes: 4, IndexBytes: 8}, &im)
			if im.ActPerSample != ref.SavedPerSample {
				t.Errorf("imported stack keeps %d bytes per sample; PyTorch's autograd %d", im.ActPerSample, ref.SavedPerSample)
			}
		})
	}
}
