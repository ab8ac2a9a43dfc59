package export

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport"
	"stackfit/engine/stackfile"
)

// paperNet is a stack file under testdata/papers held to the network its
// paper describes, which testdata/papers/rearrange_papers.py builds in
// PyTorch.
type paperNet struct {
	file, model string
}

// rearrangePapers: Shi et al. 2016's sub-pixel upsampler (to-space) and
// Han et al. 2020's Ghost modules and bottlenecks (a fork with an empty
// branch, then keep).
var rearrangePapers = []paperNet{
	{"espcn", "upsampler"},
	{"ghost-bottlenecks", "ghost"},
}

type paperJob struct {
	Name    string   `json:"name"`
	Model   string   `json:"model"`
	Input   [3]int64 `json:"input"`
	Export  string   `json:"export"`
	ONNXDir string   `json:"onnx_dir"`
}

type paperResult struct {
	Name    string `json:"name"`
	Params  int64  `json:"params"`
	Buffers int64  `json:"buffers"`
	Saved   int64  `json:"saved_per_sample"`
	Rows    []struct {
		Op  string  `json:"op"`
		Out []int64 `json:"out"`
	} `json:"rows"`
	ONNX    map[string]string `json:"onnx"`
	MaxDiff float64           `json:"max_diff"`
	Scale   float64           `json:"scale"`
	Pairs   int               `json:"pairs"`
	Error   string            `json:"error"`
}

// paperOp names an engine row as the reference's forward records its
// step: the join of a fork is the concatenation.
func paperOp(row *engine.Row) string {
	if row.Layer.Kind == engine.KindFork {
		return "cat"
	}
	return row.Layer.Kind.String()
}

// TestRearrangePapers builds each network of rearrangePapers in PyTorch
// (Debian's python3-torch 1.13) from its paper and holds the stack file to
// it exactly: trainable parameters and buffer elements; the bytes autograd
// keeps per sample in fp32 against the engine's activation memory (the
// method of TestActivationsAgainstPyTorch: every storage once, so a
// convolution after keep keeps the whole joined map its input is a view
// of); every row's step and output shape in forward order. The exported
// module, given the reference's state tensor for tensor, computes the same
// outputs within 1e-5 of their scale. The reference is also exported to
// ONNX at opsets 13 and 17 (training mode, batch norms kept) and imported:
// the imported stack has the stack file's parameters, buffers, MACs,
// activation bytes and output.
func TestRearrangePapers(t *testing.T) {
	needReference(t)
	t.Parallel()
	script, err := os.ReadFile(filepath.Join("..", "..", "testdata", "papers", "rearrange_papers.py"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	cpu := engine.Assumptions{MaskBytes: 4, IndexBytes: 8} // as TestActivationsAgainstPyTorch
	stacks := map[string]*engine.Stack{}
	var jobs []paperJob
	for _, n := range rearrangePapers {
		data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "papers", n.file+".yaml"))
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(data)
		if err != nil {
			t.Fatalf("%s: %v", n.file, err)
		}
		path, _ := exportFile(t, s, dir, "paper-"+n.file)
		stacks[n.file] = s
		jobs = append(jobs, paperJob{Name: n.file, Model: n.model, Input: [3]int64{s.Input.C, s.Input.H, s.Input.W}, Export: path, ONNXDir: dir})
	}
	got := runPython(t, string(script), jobs, map[int]string{
		probeNoTorch: "PyTorch is not available to " + python + "; install Debian's python3-torch",
	}, func(r paperResult) string { return r.Name })

	actPerSample := func(r *engine.Result) int64 {
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1}, cpu, &m)
		return m.ActPerSample
	}
	for _, n := range rearrangePapers {
		t.Run(n.file, func(t *testing.T) {
			g, ok := got[n.file]
			if !ok {
				t.Fatal("the script printed nothing for it")
			}
			if g.Error != "" {
				t.Fatalf("PyTorch: %s", g.Error)
			}
			s := stacks[n.file]
			r := engine.Evaluate(s)
			if r.Errors != 0 {
				t.Fatalf("stack errors: %v", r.Diags)
			}
			if g.Params != r.Totals.Params || g.Buffers != r.Totals.Buffers {
				t.Errorf("PyTorch counts %d parameters and %d buffer values, the engine %d and %d", g.Params, g.Buffers, r.Totals.Params, r.Totals.Buffers)
			}
			if act := actPerSample(r); act != g.Saved {
				t.Errorf("autograd keeps %d bytes per sample, the engine counts %d", g.Saved, act)
			}
			if len(g.Rows) != len(r.Rows) {
				t.Errorf("PyTorch runs %d steps, the stack has %d rows", len(g.Rows), len(r.Rows))
			}
			for i := range min(len(g.Rows), len(r.Rows)) {
				row := &r.Rows[i]
				out := []int64{row.Out.C, row.Out.H, row.Out.W}
				if op := paperOp(row); op != g.Rows[i].Op || !slices.Equal(out, g.Rows[i].Out) {
					t.Errorf("row %s: the engine's %s gives %v, PyTorch's step %d is %s giving %v", row.Path, op, out, i+1, g.Rows[i].Op, g.Rows[i].Out)
				}
			}
			if g.Scale == 0 || g.MaxDiff > 1e-5*max(g.Scale, 1) {
				t.Errorf("exported module and reference differ by up to %g at output magnitude %g", g.MaxDiff, g.Scale)
			}
			t.Logf("%d params, %d buffers, %d bytes kept per sample, %d rows; %d state tensors copied, outputs within %g of magnitude %g",
				r.Totals.Params, r.Totals.Buffers, g.Saved, len(r.Rows), g.Pairs, g.MaxDiff, g.Scale)
			for _, opset := range []string{"13", "17"} {
				data, err := os.ReadFile(g.ONNX[opset])
				if err != nil {
					t.Errorf("opset %s: %v", opset, err)
					continue
				}
				is, _, err := onnximport.Import(data, fmt.Sprintf("%s-%s", n.file, opset))
				if err != nil {
					t.Errorf("opset %s: import: %v", opset, err)
					continue
				}
				ir := engine.Evaluate(is)
				if ir.Errors != 0 || ir.Totals != r.Totals || ir.Output != r.Output || is.Input != s.Input {
					t.Errorf("opset %s: imported %v → %v with %+v (%v); the stack file %v → %v with %+v",
						opset, is.Input, ir.Output, ir.Totals, ir.Diags, s.Input, r.Output, r.Totals)
				}
				if a, b := actPerSample(ir), actPerSample(r); a != b {
					t.Errorf("opset %s: the imported stack keeps %d bytes per sample, the stack file %d", opset, a, b)
				}
				if !kindsUsed(is.Layers, n.file == "espcn") {
					t.Errorf("opset %s: the imported stack holds no %s", opset, map[bool]string{true: "to-space", false: "keep"}[n.file == "espcn"])
				}
			}
		})
	}
}

// kindsUsed reports whether the layers (bodies included) hold a to-space
// row (space) or a keep row (not space).
func kindsUsed(ls []engine.Layer, space bool) bool {
	want := engine.KindKeep
	if space {
		want = engine.KindToSpace
	}
	for i := range ls {
		if ls[i].Kind == want || kindsUsed(ls[i].Body, space) {
			return true
		}
	}
	return false
}
