package engine

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sort"
	"sync"
)

// Grid lists the values a sweep takes on each dimension; every
// combination is one variant. An empty list means the stack as written on
// that dimension (width, depth and resolution ×1) or the training's own
// setting (batch, precision).
type Grid struct {
	Widths      []float64 // width multipliers (ScaleWidth; 1 leaves widths as written)
	Depths      []float64 // depth multipliers (ScaleDepth)
	Resolutions []float64 // input resolution multipliers (ResolutionSize)
	Batches     []int64   // global batches
	Precisions  []Precision
	Divisor     int64 // widths are rounded to multiples of it; 0 means 8
}

// MaxGridPrecisions is how many precisions a grid may list: each one
// once.
const MaxGridPrecisions = 6

// filled returns the grid with empty lists replaced by their defaults.
func (g Grid) filled(t Training) Grid {
	if len(g.Widths) == 0 {
		g.Widths = []float64{1}
	}
	if len(g.Depths) == 0 {
		g.Depths = []float64{1}
	}
	if len(g.Resolutions) == 0 {
		g.Resolutions = []float64{1}
	}
	if len(g.Batches) == 0 {
		g.Batches = []int64{max(t.Batch, 1)}
	}
	if len(g.Precisions) == 0 {
		g.Precisions = []Precision{t.Precision}
	}
	return g
}

// Check reports a grid the sweep cannot run: a multiplier that is not a
// number above 0, a batch below 1, a precision that is not known or is
// listed twice.
func (g Grid) Check() error {
	for _, d := range []struct {
		name string
		vs   []float64
	}{{"width", g.Widths}, {"depth", g.Depths}, {"resolution", g.Resolutions}} {
		for _, v := range d.vs {
			if !(v > 0) || math.IsInf(v, 0) {
				return fmt.Errorf("%w: %s multiplier %v must be a positive number, e.g. 1.25", ErrTransform, d.name, v)
			}
		}
	}
	for _, b := range g.Batches {
		if b < 1 {
			return fmt.Errorf("%w: batch %d must be 1 or more", ErrTransform, b)
		}
	}
	if len(g.Precisions) > MaxGridPrecisions {
		return fmt.Errorf("%w: %d precisions listed; each may appear once", ErrTransform, len(g.Precisions))
	}
	for i, p := range g.Precisions {
		if int(p) >= len(precisionNames) {
			return fmt.Errorf("%w: unknown precision %d", ErrTransform, int(p))
		}
		for _, q := range g.Precisions[:i] {
			if p == q {
				return fmt.Errorf("%w: precision %s is listed twice", ErrTransform, p)
			}
		}
	}
	return nil
}

// Size returns the number of variants in the grid (with defaults for empty
// lists) and whether that count overflowed int64.
func (g Grid) Size(t Training) (int64, bool) {
	f := g.filled(t)
	var ov bool
	n := int64(1)
	for _, k := range []int{len(f.Widths), len(f.Depths), len(f.Resolutions), len(f.Batches), len(f.Precisions)} {
		n = mul(&ov, n, int64(k))
	}
	return n, ov
}

// SweepRow is one variant of a sweep: its scaling, training setting and
// figures. Memory figures are the training-memory estimate (Result.Memory).
type SweepRow struct {
	Index      int64 // position in grid order: width, depth, resolution, precision, batch (the last varies fastest)
	Width      float64
	Depth      float64
	Resolution float64
	Input      Pair // the variant's input height and width
	Batch      int64
	Precision  Precision

	Params, MACs int64 // MACs per sample, one forward pass
	// Problem says why the variant has no estimate (a scaling refused, or
	// the scaled stack has errors); empty when Estimated.
	Problem   string
	Estimated bool
	Peak      int64 // estimated step peak per GPU at Batch (Memory.Total), bytes
	MaxBatch  int64 // largest global batch that fits the budget (SolveCapacity's); 0: none, or no budget
	Fits      bool  // Peak is within the budget less the headroom (true with no budget)
	// Frontier: no other estimated variant of the sweep needs at most the
	// MACs and at most the peak, and less of one of them (Pareto).
	Frontier bool
	// Step is the estimated seconds of one training step at Batch on the
	// training's device (Result.Time's Step), and SamplesPerSecond
	// Batch / Step; both 0 when the training names no device (Timed false)
	// or the variant has no estimate.
	Step, SamplesPerSecond float64
	Timed                  bool
}

// SweepStats counts a sweep's work.
type SweepStats struct {
	Variants    int64 // rows
	Shapes      int64 // distinct width × depth × resolution variants
	Evaluations int64 // stack evaluations (Shapes, or twice Shapes when the profiles were not all kept)
	Frontier    int   // distinct (MACs, peak) points on the frontier
}

// SweepProfileCache is how many variants' profiles (about 300 bytes each)
// a sweep keeps between its two passes; a grid with more width × depth ×
// resolution variants evaluates each twice instead.
const SweepProfileCache = 1 << 15

// sweepTimeCache bounds the step times a sweep with a device keeps with
// its profiles (one per batch and precision of each kept variant); a
// larger grid evaluates each variant twice instead.
const sweepTimeCache = 1 << 22

// Sweep evaluates every variant of s in the grid under t (its batch and
// precision replaced by the grid's) and calls yield with each row in grid
// order; the row is reused after yield returns. It runs in two passes:
// the first finds the frontier of MACs against peak memory (keeping only
// the frontier's points, and the profiles of up to SweepProfileCache
// width × depth × resolution variants), the second yields the rows, each
// marked. Memory is bounded by the frontier, the profile cache and a
// window of workers·8 profiles, whatever the grid's size.
//
// Each width × depth × resolution variant is scaled in memory (as Scale
// does, the width and depth scalings shared by every resolution) and
// evaluated once per pass, with one activation profile per kind of
// precision (fp32; autocast; half precision throughout); every batch and
// precision is derived from it in closed form: memory is affine in the
// micro-batch, total = fixed + micro·per-sample, so the largest micro-batch
// is ⌊(budget − headroom − fixed) / per-sample⌋, as SolveCapacity solves
// it. With a device (Training.Device), each variant's step time comes
// from the same evaluation: per precision a StepCurve (the roofline sum in
// closed form over the micro-batch) gives every batch's step time. workers goroutines share the evaluations (at least 1). ctx is
// checked between windows; yield's error stops the sweep and is returned.
func Sweep(ctx context.Context, s *Stack, t Training, a Assumptions, g Grid, workers int, yield func(*SweepRow) error) (SweepStats, error) {
	var st SweepStats
	if err := g.Check(); err != nil {
		return st, err
	}
	g = g.filled(t)
	if _, ov := g.Size(t); ov {
		return st, fmt.Errorf("%w: the grid has too many variants to count", ErrTransform)
	}
	sw := &sweeper{s: s, t: t, a: a, g: g, workers: max(workers, 1)}
	sw.dev, sw.timed = t.Device()
	sw.nShapes = int64(len(g.Widths)) * int64(len(g.Depths)) * int64(len(g.Resolutions))
	st.Shapes = sw.nShapes
	keep := sw.nShapes <= SweepProfileCache &&
		(!sw.timed || sw.nShapes*int64(len(g.Batches)*len(g.Precisions)) <= sweepTimeCache)
	var cache []sweepProfile
	if keep {
		cache = make([]sweepProfile, sw.nShapes)
	}
	var front frontier
	var row SweepRow
	err := sw.profiles(ctx, func(i int64, p *sweepProfile) error {
		if keep {
			cache[i] = *p
			cache[i].times = slices.Clone(p.times) // p's storage is reused
		}
		sw.expand(p, &row, func(r *SweepRow) error {
			if r.Estimated {
				front.add(r.MACs, r.Peak)
			}
			return nil
		})
		return nil
	})
	st.Evaluations = sw.nShapes
	if err != nil {
		return st, err
	}
	st.Frontier = len(front)
	emit := func(i int64, p *sweepProfile) error {
		return sw.expand(p, &row, func(r *SweepRow) error {
			r.Frontier = r.Estimated && front.has(r.MACs, r.Peak)
			st.Variants++
			return yield(r)
		})
	}
	if keep {
		for i := range cache {
			if i%256 == 0 {
				if err := ctx.Err(); err != nil {
					return st, err
				}
			}
			if err := emit(int64(i), &cache[i]); err != nil {
				return st, err
			}
		}
		return st, nil
	}
	st.Evaluations += sw.nShapes
	return st, sw.profiles(ctx, emit)
}

// sweepProfile is what a sweep keeps of one width × depth × resolution
// variant: enough to derive every batch and precision in closed form.
type sweepProfile struct {
	idx               int64 // position among the width × depth × resolution variants
	width, depth, res float64
	input             Pair
	params, macs      int64
	problem           string
	estimated         bool
	prec              [MaxGridPrecisions]precProfile
	times             []float64 // step seconds per precision and batch (batch fastest); nil without a device
}

// precProfile is the memory of a variant at one precision, per the
// affine model: total(micro) = fixed + micro·per.
type precProfile struct {
	per      int64 // activation and scratch bytes per sample
	fixed    int64 // everything that does not grow with the batch
	infFixed int64 // inference's fixed part, and liveE its bytes per sample (for fill's overflow check)
	liveE    int64
	reserve  int64
	ov       bool // the estimate overflows already at micro-batch 1
}

// sweeper holds a sweep's inputs and per-worker storage.
type sweeper struct {
	s       *Stack
	t       Training
	a       Assumptions
	g       Grid
	workers int
	nShapes int64
	ws      []sweepWorker
	dev     Device // the device of the time estimate, when timed
	timed   bool
}

// sweepWorker is one worker's reusable storage: the evaluation, the
// memory profiles, and the scaled stacks of the last width and depth.
type sweepWorker struct {
	r        Result
	m        [3]Memory
	lastW    float64
	widthS   *Stack
	widthErr error
	lastD    float64
	depthS   *Stack
	depthErr error
	view     Stack
	curve    StepCurve
}

// precisionKind groups precisions whose activation profiles are equal:
// the bytes per activation value and whether autocast runs (see
// activationProfile).
func precisionKind(p Precision) int {
	switch {
	case p == FP32:
		return 0
	case p == FP16Mixed || p == BF16Mixed:
		return 1
	}
	return 2
}

// profiles computes the profile of every width × depth × resolution
// variant, in windows of workers·8 spread over the workers, and hands
// them to fn in order.
func (sw *sweeper) profiles(ctx context.Context, fn func(i int64, p *sweepProfile) error) error {
	if sw.ws == nil {
		sw.ws = make([]sweepWorker, sw.workers)
		for k := range sw.ws {
			sw.ws[k].lastW, sw.ws[k].lastD = math.NaN(), math.NaN()
		}
	}
	window := int64(sw.workers * 8)
	buf := make([]sweepProfile, window)
	for from := int64(0); from < sw.nShapes; from += window {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := min(window, sw.nShapes-from)
		if sw.workers == 1 || n == 1 {
			for i := range n {
				sw.ws[0].profile(sw, from+i, &buf[i])
			}
		} else {
			// Each worker takes a contiguous run, so consecutive
			// resolutions share its width and depth scalings.
			var wg sync.WaitGroup
			per := (n + int64(sw.workers) - 1) / int64(sw.workers)
			for k := 0; k < sw.workers; k++ {
				lo, hi := int64(k)*per, min(int64(k+1)*per, n)
				if lo >= hi {
					break
				}
				wg.Add(1)
				go func(w *sweepWorker) {
					defer wg.Done()
					for i := lo; i < hi; i++ {
						w.profile(sw, from+i, &buf[i])
					}
				}(&sw.ws[k])
			}
			wg.Wait()
		}
		for i := range n {
			if err := fn(from+i, &buf[i]); err != nil {
				return err
			}
		}
	}
	return nil
}

// profile evaluates shape variant i into p.
func (w *sweepWorker) profile(sw *sweeper, i int64, p *sweepProfile) {
	g := sw.g
	nr, nd := int64(len(g.Resolutions)), int64(len(g.Depths))
	ri := i % nr
	di := (i / nr) % nd
	wi := i / (nr * nd)
	times := p.times[:0]
	*p = sweepProfile{idx: i, width: g.Widths[wi], depth: g.Depths[di], res: g.Resolutions[ri], times: times}
	if w.widthS == nil || w.lastW != p.width {
		w.lastW, w.lastD, w.depthS = p.width, math.NaN(), nil
		w.widthS, w.widthErr = sw.s, nil
		if p.width != 1 {
			w.widthS, w.widthErr = scaleWidth(sw.s, p.width, g.Divisor, false)
		}
	}
	if w.widthErr != nil {
		p.problem = w.widthErr.Error()
		return
	}
	if w.depthS == nil || w.lastD != p.depth {
		w.lastD = p.depth
		w.depthS, w.depthErr = ScaleDepth(w.widthS, p.depth)
	}
	if w.depthErr != nil {
		p.problem = w.depthErr.Error()
		return
	}
	// The input as ScaleResolution sets it, on a view sharing the layers
	// (evaluation reads them only).
	size := ResolutionSize(sw.s.Input, p.res)
	p.input = size
	if size.H < 1 || size.W < 1 || size.H > MaxSpatial || size.W > MaxSpatial {
		p.problem = fmt.Sprintf("input size %d×%d is outside 1 to %d", size.H, size.W, MaxSpatial)
		return
	}
	if !sw.s.Input.Spatial() && (size.H > 1 || size.W > 1) {
		p.problem = "the input has no height and width to scale"
		return
	}
	w.view = *w.depthS
	w.view.Input.H, w.view.Input.W = size.H, size.W
	r := &w.r
	r.Evaluate(&w.view)
	p.params, p.macs = r.Totals.Params, r.Totals.MACs
	if r.Errors > 0 {
		p.problem = fmt.Sprintf("the variant has %d error(s)", r.Errors)
		return
	}
	if len(r.Rows) == 0 {
		p.problem = "the stack is empty"
		return
	}
	p.estimated = true
	var done [3]bool
	one := sw.t
	one.Batch = 1 // micro-batch 1 whatever the GPUs and accumulation
	for j, prec := range g.Precisions {
		k := precisionKind(prec)
		one.Precision = prec
		m := &w.m[k]
		if !done[k] {
			r.Memory(one, sw.a, m)
			done[k] = true
		} else {
			m.Retarget(r, one)
		}
		var ov bool
		pp := &p.prec[j]
		pp.per = add(&ov, m.ActPerSample, m.ScratchPerSample)
		pp.fixed = m.Total - pp.per
		pp.liveE = mul(&ov, m.LivePerSample, ActivationBytes(prec))
		pp.infFixed = m.Inference - pp.liveE
		pp.reserve = m.Reserve
		pp.ov = ov || m.Total == math.MaxInt64 || pp.fixed < 0 || !m.Estimated
		if sw.timed {
			w.curve.Build(r, one, sw.dev, sw.t.Efficiencies())
			for _, b := range g.Batches {
				p.times = append(p.times, w.curve.Step(b))
			}
		}
	}
}

// expand yields p's rows, batch varying fastest within each precision.
func (sw *sweeper) expand(p *sweepProfile, row *SweepRow, yield func(*SweepRow) error) error {
	t := sw.t
	nb, np := int64(len(sw.g.Batches)), int64(len(sw.g.Precisions))
	var stOv bool
	st := mul(&stOv, max(t.GPUs, 1), max(t.Accumulate, 1))
	for j, prec := range sw.g.Precisions {
		pp := &p.prec[j]
		for bi, b := range sw.g.Batches {
			*row = SweepRow{
				Width: p.width, Depth: p.depth, Resolution: p.res, Input: p.input,
				Batch: b, Precision: prec, Params: p.params, MACs: p.macs,
				Problem: p.problem, Estimated: p.estimated,
			}
			row.Index = p.idx*nb*np + int64(j)*nb + int64(bi)
			if p.estimated {
				tb := t
				tb.Batch = b
				micro := tb.MicroBatch()
				var ov bool
				used := mul(&ov, micro, pp.per)
				total := add(&ov, pp.fixed, used)
				add(&ov, pp.infFixed, mul(&ov, pp.liveE, micro))
				ov = ov || pp.ov
				if ov {
					total = math.MaxInt64
				}
				row.Peak = total
				if sw.timed {
					row.Timed = true
					row.Step = p.times[j*int(nb)+bi]
					if row.Step > 0 {
						row.SamplesPerSecond = float64(b) / row.Step
					}
				}
				usable := t.Budget - pp.reserve
				row.Fits = t.Budget == 0 || (!ov && total <= usable)
				if t.Budget > 0 && !ov && pp.per > 0 && usable-pp.fixed >= pp.per && !stOv {
					var bov bool
					mb := mul(&bov, (usable-pp.fixed)/pp.per, st)
					if !bov {
						row.MaxBatch = mb
					}
				}
			}
			if err := yield(row); err != nil {
				return err
			}
		}
	}
	return nil
}

// frontier is the Pareto staircase of (MACs, peak) points, both to be
// small: sorted by MACs ascending with peaks strictly descending, each
// point once. A point enters only if none there is at most as large in
// both; it removes the points it is at most as large as.
type frontier []struct{ macs, peak int64 }

func (f *frontier) add(macs, peak int64) {
	s := *f
	// i: first point with MACs > macs; the point before it has the
	// smallest peak among those with MACs ≤ macs.
	i := sort.Search(len(s), func(k int) bool { return s[k].macs > macs })
	if i > 0 && s[i-1].peak <= peak {
		return // dominated, or already there
	}
	// Points from j on with MACs ≥ macs and peak ≥ peak are dominated.
	j := i
	if i > 0 && s[i-1].macs == macs {
		j = i - 1 // same MACs, larger peak
	}
	e := j
	for e < len(s) && s[e].peak >= peak {
		e++
	}
	s = slices.Delete(s, j, e)
	*f = slices.Insert(s, j, struct{ macs, peak int64 }{macs, peak})
}

func (f frontier) has(macs, peak int64) bool {
	i := sort.Search(len(f), func(k int) bool { return f[k].macs >= macs })
	return i < len(f) && f[i].macs == macs && f[i].peak == peak
}
