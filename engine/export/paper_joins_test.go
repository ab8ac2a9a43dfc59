package export

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport"
	"stackfit/engine/stackfile"
)

// paperJoins are the stacks of testdata/papers with additive forks and
// branches from named outputs, each beside the module
// testdata/papers/joins_reference.py writes by hand from its paper:
// ResNet-D's downsampling shortcut (He et al. 2019, Figure 2(c)), a
// feature pyramid's top-down path (Lin et al. 2017, Figure 3) and
// Res2Net's hierarchical splits (Gao et al. 2019, Figure 2). onnx: the
// reference is exported to ONNX and imported back.
var paperJoins = []struct {
	file, model string
	onnx        bool
}{
	{"resnet-d-stage", "resnet_d", true},
	{"fpn-top-down", "fpn", true},
	{"res2net-unit", "res2net", false},
}

// TestPaperJoinsAgainstPyTorch holds each stack to its paper's module in
// Debian's PyTorch 1.13: parameters and buffer elements, the bytes
// autograd saves for backward per sample in fp32 training mode
// (saved_tensors_hooks, each storage once), and every row's output
// shape, all exact; the exported module given the reference's weights
// computes the same outputs (eval and training mode, within 1e-4); and
// the reference exported to ONNX at opsets 13 and 17 imports back with
// the same parameters and buffers, the ResNet-D shortcut as an additive
// fork and the pyramid's laterals as branches from named outputs.
func TestPaperJoinsAgainstPyTorch(t *testing.T) {
	needReference(t)
	dir := t.TempDir()
	script := filepath.Join("..", "..", "testdata", "papers", "joins_reference.py")
	if out, err := exec.Command(python, script, "measure", dir).CombinedOutput(); err != nil {
		t.Fatalf("measure: %v\n%s", err, out)
	}
	data, err := os.ReadFile(filepath.Join(dir, "measure.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref map[string]struct {
		Params  int64      `json:"params"`
		Buffers int64      `json:"buffers"`
		Saved   int64      `json:"saved_per_sample"`
		Rows    [][3]int64 `json:"rows"`
	}
	if err := json.Unmarshal(data, &ref); err != nil {
		t.Fatal(err)
	}
	for _, c := range paperJoins {
		t.Run(c.file, func(t *testing.T) {
			want, ok := ref[c.model]
			if !ok {
				t.Fatalf("no reference for %s", c.model)
			}
			b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "papers", c.file+".yaml"))
			if err != nil {
				t.Fatal(err)
			}
			s, err := stackfile.Load(b)
			if err != nil {
				t.Fatal(err)
			}
			path, an := exportFile(t, s, dir, c.file)
			r := an.Result
			if r.Errors != 0 {
				t.Fatalf("errors: %v", r.Diags)
			}
			if r.Totals.Params != want.Params || r.Totals.Buffers != want.Buffers {
				t.Errorf("params %d, buffers %d; PyTorch %d, %d", r.Totals.Params, r.Totals.Buffers, want.Params, want.Buffers)
			}
			var m engine.Memory
			r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
			if m.ActPerSample != want.Saved {
				t.Errorf("keeps %d bytes per sample for backward, autograd %d", m.ActPerSample, want.Saved)
			}
			if len(r.Rows) != len(want.Rows) {
				t.Errorf("%d rows, the reference has %d steps", len(r.Rows), len(want.Rows))
			}
			for i := range min(len(r.Rows), len(want.Rows)) {
				w := want.Rows[i]
				if got := r.Rows[i].Out; got != (engine.Shape{C: w[0], H: w[1], W: w[2]}) {
					t.Errorf("row %s: %v, PyTorch %v", r.Rows[i].Path, got, w)
				}
			}
			out, err := exec.Command(python, script, "compare", c.model, path).CombinedOutput()
			if err != nil {
				t.Fatalf("compare: %v\n%s", err, out)
			}
			var cmp struct {
				Diff float64 `json:"max_abs_diff"`
			}
			if err := json.Unmarshal(out, &cmp); err != nil {
				t.Fatalf("compare: %v\n%s", err, out)
			}
			if cmp.Diff > 1e-4 {
				t.Errorf("the exported module's outputs differ from the reference's by up to %g", cmp.Diff)
			}
			if !c.onnx {
				return
			}
			for _, opset := range []string{"13", "17"} {
				name := c.model + "-" + opset
				data, err := os.ReadFile(filepath.Join(dir, name+".onnx"))
				if err != nil {
					t.Fatal(err)
				}
				is, _, err := onnximport.Import(data, name)
				if err != nil {
					t.Errorf("%s: %v", name, err)
					continue
				}
				ir := engine.Evaluate(is)
				if ir.Errors != 0 || ir.Totals.Params != want.Params || ir.Totals.Buffers != want.Buffers {
					t.Errorf("%s imported: %d errors, params %d, buffers %d; PyTorch %d, %d", name, ir.Errors, ir.Totals.Params, ir.Totals.Buffers, want.Params, want.Buffers)
				}
				adds, froms := countJoins(is.Layers)
				if adds == 0 || c.model == "fpn" && froms != 2 {
					t.Errorf("%s imported with %d additive forks and %d branches from named outputs", name, adds, froms)
				}
			}
		})
	}
}

// countJoins counts the additive forks and the branches from named
// outputs in ls, bodies included.
func countJoins(ls []engine.Layer) (adds, froms int) {
	for i := range ls {
		if ls[i].Kind == engine.KindFork && ls[i].JoinAdd {
			adds++
		}
		if ls[i].Kind == engine.KindBranch && ls[i].From != "" {
			froms++
		}
		a, f := countJoins(ls[i].Body)
		adds, froms = adds+a, froms+f
	}
	return adds, froms
}
