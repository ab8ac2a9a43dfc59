package engine

import (
	"context"
	"math"
)

// Fit holds the fit solver's answers for a stack, a training setup and a
// budget. A zero answer means nothing fits; the Limit fields name the
// category that stands in the way (the largest one just past the answer).
type Fit struct {
	MaxBatch      int64 // largest global batch that fits (micro-batch × GPUs × accumulation)
	MaxMicroBatch int64 // largest per-GPU micro-batch that fits
	BatchLimit    string

	MaxWidth   float64 // largest width multiplier that fits at the current batch (widths rounded to multiples of 8)
	WidthLimit string

	MinGPUs    int64 // fewest GPUs, with the chosen sharding, that fit the current batch
	GPUsLimit  string
	HasBudget  bool // false: no budget was given, or the memory was not estimated (Memory.Estimated); there are no answers
	WidthExact bool // the width search converged within 0.01
}

// maxSearchGPUs bounds the GPU-count search.
const maxSearchGPUs = 1 << 16

// SolveFit answers: the largest batch that fits, the largest width
// multiplier at the current batch, and the fewest GPUs for the current
// batch. m must be r.Memory(t, a, m) for the same r and t. Memory is affine
// in the micro-batch, so the batch is solved directly; the GPU count is
// found by bisection over a monotone function; the width multiplier by
// bisection over re-evaluations of the scaled stack.
func SolveFit(s *Stack, r *Result, m *Memory, t Training, a Assumptions) Fit {
	f := SolveCapacity(r, m, t)
	if f.HasBudget {
		f.MaxWidth, f.WidthLimit, f.WidthExact = MaxWidth(s, t, a)
	}
	return f
}

// SolveCapacity gives the two answers that need no re-evaluation of the
// stack (largest batch, fewest GPUs); it takes microseconds, so an editor
// can run it on every keystroke and leave MaxWidth to the background.
// Memory that is not estimated (a stack with errors) gets no answers.
func SolveCapacity(r *Result, m *Memory, t Training) Fit {
	var f Fit
	if t.Budget <= 0 || !m.Estimated {
		return f
	}
	f.HasBudget = true
	usable := t.Budget - m.Reserve

	// Batch: total(micro) = fixed + micro·per, exactly (integers); any
	// overflow means nothing sensible fits.
	probe := *m
	probe.Rows = nil
	var ov bool
	per := add(&ov, m.ActPerSample, m.ScratchPerSample)
	used := mul(&ov, m.MicroBatch, per)
	fixed := m.Total - used
	if !ov && m.Total < math.MaxInt64 && fixed >= 0 && per > 0 && usable-fixed >= per {
		f.MaxMicroBatch = (usable - fixed) / per
	}
	steps := mul(&ov, max(t.GPUs, 1), max(t.Accumulate, 1))
	f.MaxBatch = mul(&ov, f.MaxMicroBatch, steps)
	if ov {
		f.MaxMicroBatch, f.MaxBatch = 0, 0
	}
	if f.MaxMicroBatch > 0 {
		f.BatchLimit = CatActivations
	} else {
		one := t
		one.Batch = steps
		probe.Retarget(r, one)
		f.BatchLimit = probe.Largest()
	}

	// GPUs: per-GPU memory never grows with more GPUs.
	fitsWith := func(g int64) (bool, string) {
		tt := t
		tt.GPUs = g
		probe.Retarget(r, tt)
		return probe.Fits, probe.Largest()
	}
	if ok, _ := fitsWith(maxSearchGPUs); ok {
		lo, hi := int64(1), int64(maxSearchGPUs) // invariant: hi fits
		if ok1, _ := fitsWith(1); ok1 {
			hi = 1
		}
		for hi-lo > 1 {
			mid := lo + (hi-lo)/2
			if ok, _ := fitsWith(mid); ok {
				hi = mid
			} else {
				lo = mid
			}
		}
		f.MinGPUs = hi
		if hi > 1 {
			_, f.GPUsLimit = fitsWith(hi - 1)
		}
	} else {
		_, f.GPUsLimit = fitsWith(maxSearchGPUs)
	}

	return f
}

// MaxWidth bisects the width multiplier on a log scale between 1/32 and 32
// and returns the largest (to 0.01, rounded down) that fits, the category
// that stops the next step, and whether the search converged (false when
// even ×32 fits).
func MaxWidth(s *Stack, t Training, a Assumptions) (float64, string, bool) {
	w, lim, exact, _ := SearchWidth(context.Background(), s, t, a, &Result{}, &Memory{})
	return w, lim, exact
}

// SearchWidth is MaxWidth that stops when ctx is done and evaluates into
// the caller's storage: r and m are overwritten by each try (their
// slices' capacity is reused, so a search allocates no per-row storage
// once they are large enough) and hold the last try's figures afterwards,
// not s's. ctx is checked before every re-evaluation; a search stopped by
// it returns ctx.Err() and no answer.
func SearchWidth(ctx context.Context, s *Stack, t Training, a Assumptions, r *Result, m *Memory) (float64, string, bool, error) {
	try := func(alpha float64) (bool, string) {
		scaled, err := scaleWidth(s, alpha, 8, false)
		if err != nil {
			return false, CatWeights
		}
		r.Evaluate(scaled)
		if r.Errors > 0 {
			return false, CatWeights
		}
		r.Memory(t, a, m)
		return m.Fits, m.Largest()
	}
	lo, hi := math.Log(1.0/32), math.Log(32)
	if err := ctx.Err(); err != nil {
		return 0, "", false, err
	}
	if ok, lim := try(math.Exp(lo)); !ok {
		return 0, lim, true, nil
	}
	if err := ctx.Err(); err != nil {
		return 0, "", false, err
	}
	if ok, _ := try(math.Exp(hi)); ok {
		return 32, "", false, nil
	}
	for i := 0; i < 40 && math.Exp(hi)-math.Exp(lo) > 0.005; i++ {
		if err := ctx.Err(); err != nil {
			return 0, "", false, err
		}
		mid := (lo + hi) / 2
		if ok, _ := try(math.Exp(mid)); ok {
			lo = mid
		} else {
			hi = mid
		}
	}
	if err := ctx.Err(); err != nil {
		return 0, "", false, err
	}
	_, lim := try(math.Exp(hi))
	return math.Floor(math.Exp(lo)*100) / 100, lim, true, nil
}
