package engine

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
}

// Analyze evaluates s, estimates its training memory under t and runs the
// fit solver when t has a budget.
func Analyze(s *Stack, t Training, a Assumptions) *Analysis {
	an := &Analysis{Stack: s, Training: t, Assumptions: a, Result: Evaluate(s)}
	an.Result.Memory(t, a, &an.Memory)
	if an.Result.Errors == 0 {
		an.Fit = SolveFit(s, an.Result, &an.Memory, t, a)
	}
	an.Memory.dropScratch() // a one-shot analysis keeps its figures, not the walk's storage
	return an
}

// MemoryEstimated reports whether the memory figures are an estimate at
// all: false when the stack has errors (see Memory.Reason), and then the
// memory has no verdict and the fit solver no answers.
func (an *Analysis) MemoryEstimated() bool { return an.Memory.Estimated }
