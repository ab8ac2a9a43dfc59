package engine_test

import (
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// referenceDoc is testdata/reference/shapes.json, written by
// testdata/reference/torch_reference.py with PyTorch (Debian python3-torch).
type referenceDoc struct {
	About string `json:"about"`
	Cases []struct {
		Stack  json.RawMessage `json:"stack"`
		Layers []struct {
			Path    string   `json:"path"`
			Out     [3]int64 `json:"out"`
			Params  int64    `json:"params"`
			Buffers int64    `json:"buffers"`
		} `json:"layers"`
		ErrorAt        *int   `json:"error_at"`
		TorchError     string `json:"torch_error"`
		SavedPerSample *int64 `json:"saved_per_sample"`
	} `json:"cases"`
}

// loadReference reads testdata/reference/shapes.json.
func loadReference(t *testing.T) referenceDoc {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "shapes.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc referenceDoc
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	return doc
}

// TestAgainstPyTorch compares the engine, layer by layer, with the shapes,
// parameter counts and buffer counts PyTorch produced for the same stacks,
// and checks that the engine reports an error exactly where PyTorch
// refused a layer.
func TestAgainstPyTorch(t *testing.T) {
	doc := loadReference(t)
	if len(doc.Cases) < 80 {
		t.Fatalf("only %d reference stacks", len(doc.Cases))
	}
	for _, c := range doc.Cases {
		s, err := stackfile.Load(c.Stack)
		if err != nil {
			t.Errorf("load reference stack: %v\n%s", err, c.Stack)
			continue
		}
		t.Run(s.Name, func(t *testing.T) {
			r := engine.Evaluate(s)
			if len(r.Rows) < len(c.Layers) {
				t.Fatalf("engine has %d rows, PyTorch %d", len(r.Rows), len(c.Layers))
			}
			for i, want := range c.Layers {
				row := r.Rows[i]
				got := [3]int64{row.Out.C, row.Out.H, row.Out.W}
				if row.Path.String() != want.Path || row.Status != engine.StatusOK || got != want.Out || row.Params != want.Params || row.Buffers != want.Buffers {
					t.Errorf("row %s %s: engine %s %v %v params %d buffers %d; PyTorch %s %v params %d buffers %d; diags %v",
						row.Path, engine.RowSummary(&row), row.Path, row.Status, got, row.Params, row.Buffers, want.Path, want.Out, want.Params, want.Buffers, r.DiagsFor(i))
				}
			}
			if c.ErrorAt != nil {
				i := *c.ErrorAt
				if i >= len(r.Rows) || r.Rows[i].Status != engine.StatusError {
					t.Errorf("row %d: PyTorch refused it (%s) but the engine does not report an error there", i+1, c.TorchError)
				}
			} else if r.Errors != 0 {
				t.Errorf("PyTorch ran every layer but the engine reports %v", r.Diags)
			}
		})
	}
}

// TestActivationsAgainstPyTorch compares the activation memory the engine
// expects a training step to keep per sample (fp32) with what PyTorch's
// autograd actually saved for the same stacks (torch_reference.py, with
// saved_tensors_hooks): exactly, byte for byte, on every stack PyTorch ran
// whole (forks, gates, dense links and the published mobile networks
// among them). The CPU
// reference keeps dropout masks as 4-byte floats, so the comparison uses
// 4-byte masks; the engine's default is the GPU's 1 byte.
func TestActivationsAgainstPyTorch(t *testing.T) {
	doc := loadReference(t)
	cpu := engine.Assumptions{MaskBytes: 4, IndexBytes: 8}
	checked := 0
	for _, c := range doc.Cases {
		if c.SavedPerSample == nil {
			continue
		}
		s, err := stackfile.Load(c.Stack)
		if err != nil {
			t.Fatal(err)
		}
		r := engine.Evaluate(s)
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1}, cpu, &m)
		want := float64(*c.SavedPerSample)
		if m.ActPerSample != *c.SavedPerSample {
			dev := (float64(m.ActPerSample) - want) / max(want, 1)
			t.Errorf("%s: engine keeps %d bytes per sample, PyTorch %d (%+.2f%%)", s.Name, m.ActPerSample, *c.SavedPerSample, 100*dev)
		}
		checked++
	}
	if checked < 130 {
		t.Errorf("only %d stacks with saved-tensor figures", checked)
	}
}
