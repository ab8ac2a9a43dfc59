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

// activationPapers: He et al. 2015's parametric rectifiers (prelu, one
// slope per channel and one shared) and Misra 2019's Mish, with a softmax
// over the channels at each position, each a stack file under
// testdata/papers beside the module testdata/papers/activation_papers.py
// builds from the paper; want lists the activations the stack and its
// ONNX import must hold.
var activationPapers = []struct {
	paperNet
	want []engine.ActKind
}{
	{paperNet{"prelu-net", "prelu"}, []engine.ActKind{engine.ActPReLU}},
	{paperNet{"mish-net", "mish"}, []engine.ActKind{engine.ActMish, engine.ActSoftmax}},
}

// TestActivationPapers builds each network of activationPapers in PyTorch
// (Debian's python3-torch 1.13) and holds the stack file to it exactly, by
// the method of TestRearrangePapers: trainable parameters (the prelu
// slopes among them) and buffer elements; the bytes autograd keeps per
// sample in fp32 (saved_tensors_hooks: prelu and mish keep their input,
// softmax its output); every row's step and output shape in forward
// order; the exported module, given the reference's state tensor for
// tensor, computes the same outputs within 1e-5 of their scale. The
// reference is exported to ONNX at opsets 13 and 17 and imported: the
// same parameters, buffers, MACs, activation bytes and output, with the
// activations read back (PRelu with its slope initializer, Softmax over
// axis 1, Mish as torch.onnx writes it: Softplus, Tanh, Mul).
func TestActivationPapers(t *testing.T) {
	needReference(t)
	t.Parallel()
	script, err := os.ReadFile(filepath.Join("..", "..", "testdata", "papers", "activation_papers.py"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	cpu := engine.Assumptions{MaskBytes: 4, IndexBytes: 8} // as TestActivationsAgainstPyTorch
	stacks := map[string]*engine.Stack{}
	var jobs []paperJob
	for _, n := range activationPapers {
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
	for _, n := range activationPapers {
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
			for _, a := range n.want {
				if !actsUsed(s.Layers, a) {
					t.Errorf("the stack file holds no act %s", a)
				}
			}
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
				for _, a := range n.want {
					if !actsUsed(is.Layers, a) {
						t.Errorf("opset %s: the imported stack holds no act %s", opset, a)
					}
				}
			}
		})
	}
}

// actsUsed reports whether the layers (bodies included, and a residual
// block's activation after its addition) apply activation a.
func actsUsed(ls []engine.Layer, a engine.ActKind) bool {
	for i := range ls {
		l := &ls[i]
		if l.Kind == engine.KindAct && l.Act == a || l.HasPostAct && l.PostAct == a || actsUsed(l.Body, a) {
			return true
		}
	}
	return false
}
