package engine_test

import (
	"testing"

	"stackfit/engine"
)

// TestMemoryNotEstimatedWithErrors: a stack with errors has no memory
// estimate — the rows past the error count nothing, so the partial totals
// would give a false verdict. Memory says so (Estimated, Reason), Fits is
// false, the fit solver gives no answers, and the share-of-parameters
// warning, read from the same partial totals, is not raised. The clean
// stack beside it keeps all three.
func TestMemoryNotEstimatedWithErrors(t *testing.T) {
	pad := engine.Padding{Size: engine.Square(1)}
	clean := []engine.Layer{
		{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Pad: pad},
		{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3), Pad: pad}, // 4,672 of 4,896 parameters: over half
	}
	broken := append(append([]engine.Layer{}, clean...),
		engine.Layer{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(99)}, // kernel past the 32×32 map: an error
		engine.Layer{Kind: engine.KindConv, Filters: 512, Kernel: engine.Square(3)})
	budget := engine.Training{Batch: 8, Budget: 24 << 30}
	tests := []struct {
		name      string
		layers    []engine.Layer
		training  engine.Training
		estimated bool
		fits      bool
		answers   bool // the fit solver answers
		reason    string
	}{
		{"errors, with a budget", broken, budget, false, false, false, "the stack has 1 error(s)"},
		{"errors, no budget", broken, engine.Training{Batch: 8}, false, false, false, "the stack has 1 error(s)"},
		{"clean, with a budget", clean, budget, true, true, true, ""},
		{"clean, no budget", clean, engine.Training{Batch: 8}, true, true, false, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := &engine.Stack{Input: engine.Shape{C: 3, H: 32, W: 32}, Layers: tt.layers}
			an := engine.Analyze(s, tt.training, engine.DefaultAssumptions())
			m := &an.Memory
			if m.Estimated != tt.estimated || an.MemoryEstimated() != tt.estimated || m.Fits != tt.fits || m.Reason() != tt.reason {
				t.Errorf("estimated %v (%v), fits %v, reason %q; want %v, %v, %q", m.Estimated, an.MemoryEstimated(), m.Fits, m.Reason(), tt.estimated, tt.fits, tt.reason)
			}
			if an.Fit.HasBudget != tt.answers {
				t.Errorf("fit answers %+v, want answers %v", an.Fit, tt.answers)
			}
			// The editor's quick answers come from SolveCapacity directly.
			if f := engine.SolveCapacity(an.Result, m, tt.training); f.HasBudget != tt.answers || !tt.answers && f != (engine.Fit{}) {
				t.Errorf("SolveCapacity %+v, want answers %v", f, tt.answers)
			}
			share := false
			for _, d := range an.Result.Diags {
				share = share || d.Code == engine.WarnParamShare
			}
			if share != tt.estimated {
				t.Errorf("share-of-parameters warning raised %v, want %v: %v", share, tt.estimated, an.Result.Diags)
			}
		})
	}
}
