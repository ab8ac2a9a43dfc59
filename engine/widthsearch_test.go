package engine_test

import (
	"context"
	"testing"
	"time"

	"stackfit/engine"
)

// stopAfter is a context that reports itself done from its n-th check on,
// so a test can stop a search part-way without a clock.
type stopAfter struct {
	context.Context
	n, checks int
}

func (c *stopAfter) Err() error {
	c.checks++
	if c.checks >= c.n {
		return context.Canceled
	}
	return nil
}

// TestSearchWidthStops checks that a width search gives the same answer as
// MaxWidth when left alone, reusing the caller's storage, and that a
// stopped one returns at its next check with no answer: before the first
// re-evaluation, or part-way through the bisection.
func TestSearchWidthStops(t *testing.T) {
	s := loadTestdata(t, "published/resnet50.yaml")
	a := engine.DefaultAssumptions()
	tr := engine.Training{Batch: 256, Precision: engine.BF16Mixed, Optimizer: engine.AdamW, Budget: 24 << 30}
	w, lim, exact := engine.MaxWidth(s, tr, a)
	if w <= 0 || !exact {
		t.Fatalf("MaxWidth %v %q %v: want a converged answer to compare with", w, lim, exact)
	}
	var r engine.Result
	var m engine.Memory
	w2, lim2, exact2, err := engine.SearchWidth(context.Background(), s, tr, a, &r, &m)
	if err != nil || w2 != w || lim2 != lim || exact2 != exact {
		t.Errorf("SearchWidth %v %q %v %v, MaxWidth %v %q %v", w2, lim2, exact2, err, w, lim, exact)
	}
	full := &stopAfter{Context: context.Background(), n: 1 << 30}
	engine.SearchWidth(full, s, tr, a, &r, &m)
	if full.checks < 5 {
		t.Fatalf("the search checked its context %d times; want one check per re-evaluation", full.checks)
	}
	for _, n := range []int{1, 2, full.checks / 2, full.checks} {
		c := &stopAfter{Context: context.Background(), n: n}
		w, lim, _, err := engine.SearchWidth(c, s, tr, a, &r, &m)
		if err != context.Canceled || w != 0 || lim != "" || c.checks != n {
			t.Errorf("stopped at check %d: %v %q %v after %d checks; want no answer, context.Canceled, no further checks", n, w, lim, err, c.checks)
		}
	}
	// A context that is already done: no evaluation at all.
	ctx, cancel := context.WithTimeout(context.Background(), time.Hour)
	cancel()
	if _, _, _, err := engine.SearchWidth(ctx, s, tr, a, &r, &m); err == nil {
		t.Error("a done context still gave an answer")
	}
}
