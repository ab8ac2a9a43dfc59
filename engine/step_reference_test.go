package engine_test

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"sort"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// stepReference is testdata/memory/step_reference.json, measured by
// testdata/memory/step_reference.py with Debian's python3-torch 1.13 on
// the CPU: one training step (forward, a sum loss, backward) of a fresh
// fp32 model inside torch.profiler with profile_memory, the peak of live
// bytes from its memory events, per sample as the slope between two batch
// sizes (weights and parameter gradients cancel).
type stepReference struct {
	Torch  string `json:"torch"`
	Stacks []struct {
		File      string   `json:"file"`
		Name      string   `json:"name"`
		Group     string   `json:"group"` // published, unet or random
		Input     [3]int64 `json:"input"`
		Peak      int64    `json:"peak_per_sample"`
		NoTr      int64    `json:"peak_without_transients_per_sample"`
		Phase     []string `json:"peak_phase"`
		SavedBF16 *int64   `json:"saved_per_sample_bf16"`
	} `json:"stacks"`
}

// TestStepPeakAgainstPyTorch compares the step simulation's activation
// peak per sample with PyTorch's measured one. CPU convolution kernels
// (mkldnn) make transient copies a GPU kernel does not; stackfit counts
// kernels' scratch in the workspace category, apart from the activations,
// so the comparison is with the measured peak less the transients the
// script isolates (the largest allocations made and freed inside one
// convolution). The network input is made before the profiled window and
// is left out of the engine's figure too.
//
// Targets: within 10% on ResNet-50, VGG-16, a U-Net (Ronneberger et al.
// 2015) and the families with branches, gates and dense links; within 15%
// at the 90th percentile over 40 random stacks (against the whole
// measured peak, transients included); the peak in the backward pass
// wherever PyTorch found it there. Under bf16 autocast the bytes kept for
// backward equal autograd's saved tensors (saved_tensors_hooks) within 1%.
func TestStepPeakAgainstPyTorch(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "testdata", "memory", "step_reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc stepReference
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	var random []float64
	named := 0
	for _, e := range doc.Stacks {
		b, err := os.ReadFile(filepath.Join("..", e.File))
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(b)
		if err != nil {
			t.Fatalf("%s: %v", e.File, err)
		}
		s.Input = engine.Shape{C: e.Input[0], H: e.Input[1], W: e.Input[2]}
		r := engine.Evaluate(s)
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
		in, _ := s.Input.Elements()
		est := float64(m.PeakPerSample - 4*in)
		if e.Group == "random" {
			random = append(random, math.Abs(est/float64(e.Peak)-1))
			continue
		}
		named++
		if dev := est/float64(e.NoTr) - 1; math.Abs(dev) > 0.10 {
			t.Errorf("%s: step peak %.0f bytes per sample, PyTorch %d without CPU transients (%d with): %+.1f%%", e.Name, est, e.NoTr, e.Peak, 100*dev)
		}
		if len(e.Phase) > 0 && e.Phase[len(e.Phase)-1] != m.PeakPhase.String() {
			t.Errorf("%s: peak in %v, PyTorch's in %s", e.Name, m.PeakPhase, e.Phase[len(e.Phase)-1])
		}
		// bf16 autocast on the CPU runs upsampling in fp32 (CUDA's
		// autocast does not), which the U-Net's skips then carry: left out.
		if e.SavedBF16 != nil && e.Group != "unet" {
			var mb engine.Memory
			r.Memory(engine.Training{Batch: 1, Precision: engine.BF16Mixed}, engine.DefaultAssumptions(), &mb)
			if dev := float64(mb.ActPerSample)/float64(*e.SavedBF16) - 1; math.Abs(dev) > 0.01 {
				t.Errorf("%s: bf16 autocast keeps %d bytes per sample, autograd %d: %+.2f%%", e.Name, mb.ActPerSample, *e.SavedBF16, 100*dev)
			}
		}
	}
	if named < 10 || len(random) < 40 {
		t.Fatalf("reference holds %d named and %d random stacks, want 10 and 40", named, len(random))
	}
	sort.Float64s(random)
	if p90 := random[len(random)*9/10]; p90 > 0.15 {
		t.Errorf("random stacks: 90th percentile of the deviation %.1f%%, want at most 15%%", 100*p90)
	}
}
