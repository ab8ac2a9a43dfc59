package engine

import "context"

// Analysis bundles everything stackfit computes for one stack and one
// training setup: the per-layer numbers, the memory estimate and the fit
// solver's answers.
type Analysis struct {
	Stack       *Stack
	Training    Training // the effective settings (file, then overrides)
	Assumptions Assumptions
	Result      *Result
	Memory      Memory
	Fit         Fit
	// Time is the training-time estimate, nil when the settings name no
	// device (Training.GPU).
	Time *Time
}

// Analyze evaluates s, estimates its training memory under t and runs the
// fit solver when t has a budget.
func Analyze(s *Stack, t Training, a Assumptions) *Analysis {
	t = t.WithDevice()
	an := &Analysis{Stack: s, Training: t, Assumptions: a, Result: Evaluate(s)}
	an.Result.Memory(t, a, &an.Memory)
	if an.Result.Errors == 0 {
		f := SolveCapacity(an.Result, &an.Memory, t)
		if f.HasBudget {
			// The width search evaluates into the analysis's own storage
			// rather than a second set of rows (on a million-row stack
			// that second set was as large as the first), then s is
			// evaluated again: one evaluation more, half the peak memory.
			f.MaxWidth, f.WidthLimit, f.WidthExact, _ = SearchWidth(context.Background(), s, t, a, an.Result, &an.Memory)
			an.Result.Evaluate(s)
			an.Result.Memory(t, a, &an.Memory)
		}
		an.Fit = f
	}
	if d, ok := t.Device(); ok {
		an.Time = new(Time)
		an.Result.Time(t, d, t.Efficiencies(), an.Time)
	}
	an.Memory.dropScratch() // a one-shot analysis keeps its figures, not the walk's storage
	return an
}

// MemoryEstimated reports whether the memory figures are an estimate at
// all: false when the stack has errors (see Memory.Reason), and then the
// memory has no verdict and the fit solver no answers.
func (an *Analysis) MemoryEstimated() bool { return an.Memory.Estimated }
