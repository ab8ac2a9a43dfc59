package engine_test

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"stackfit/engine"
)

// randomGrid draws a grid and a training setup: a few widths, depths and
// resolutions (some past the sizes the stacks accept, so variants with
// errors appear), batches from 1 to 2²⁰, any precisions, optimizer,
// sharding, GPUs, accumulation, checkpointing and budget (sometimes none).
func randomGrid(rng *rand.Rand) (engine.Grid, engine.Training) {
	var g engine.Grid
	pick := func(lo, hi float64, n int) []float64 {
		vs := make([]float64, n)
		for i := range vs {
			vs[i] = lo + float64(rng.IntN(int((hi-lo)*20)+1))/20
		}
		return vs
	}
	g.Widths = pick(0.25, 2, 1+rng.IntN(3))
	g.Depths = pick(0.25, 2, 1+rng.IntN(3))
	g.Resolutions = pick(0.1, 1.5, 1+rng.IntN(3))
	for range 1 + rng.IntN(4) {
		g.Batches = append(g.Batches, 1+rng.Int64N(1<<uint(rng.IntN(21))))
	}
	for _, p := range engine.Precisions() {
		if rng.IntN(3) == 0 {
			g.Precisions = append(g.Precisions, p)
		}
	}
	if rng.IntN(4) == 0 {
		g.Divisor = 4
	}
	t := engine.Training{
		Optimizer:  engine.Optimizers()[rng.IntN(len(engine.Optimizers()))],
		Shard:      engine.Shards()[rng.IntN(len(engine.Shards()))],
		GPUs:       int64(1 + rng.IntN(8)),
		Accumulate: int64(rng.IntN(4)),
		Batch:      int64(1 + rng.IntN(64)),
		Precision:  engine.Precisions()[rng.IntN(len(engine.Precisions()))],
	}
	if rng.IntN(3) == 0 {
		t.Checkpoint = int64(1 + rng.IntN(6))
	}
	if rng.IntN(5) != 0 {
		t.Budget = (1 + rng.Int64N(80)) << 30
	}
	return g, t
}

// sweepAll collects a sweep's rows.
func sweepAll(t *testing.T, s *engine.Stack, tr engine.Training, g engine.Grid, workers int) []engine.SweepRow {
	t.Helper()
	var rows []engine.SweepRow
	_, err := engine.Sweep(context.Background(), s, tr, engine.DefaultAssumptions(), g, workers, func(r *engine.SweepRow) error {
		rows = append(rows, *r)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

// TestSweepMatchesSolver checks, on random grids, every sweep row against
// the slow path the report takes: Scale the stack, Evaluate it, estimate
// its memory at the row's batch and precision (Result.Memory) and ask the
// fit solver (SolveCapacity) for the largest batch. The sweep's closed
// form and shared scalings must give the same figures.
func TestSweepMatchesSolver(t *testing.T) {
	stacks := map[string]*engine.Stack{
		"resnet18":        loadTestdata(t, "published/resnet18.yaml"),
		"mobilenet-v2":    loadTestdata(t, "published/mobilenet-v2.yaml"),
		"efficientnet-b0": loadTestdata(t, "published/efficientnet-b0.yaml"),
		"densenet121":     loadTestdata(t, "published/densenet121.yaml"),
	}
	rng := rand.New(rand.NewPCG(1, 2))
	a := engine.DefaultAssumptions()
	checked := 0
	for name, s := range stacks {
		for trial := range 3 {
			g, tr := randomGrid(rng)
			rows := sweepAll(t, s, tr, g, 1+trial%2)
			n, _ := g.Size(tr)
			if int64(len(rows)) != n {
				t.Fatalf("%s: %d rows, the grid has %d", name, len(rows), n)
			}
			for i, row := range rows {
				if row.Index != int64(i) {
					t.Fatalf("%s: row %d has index %d", name, i, row.Index)
				}
				v, err := engine.Scale(s, engine.Scaling{Width: row.Width, Depth: row.Depth, Resolution: row.Resolution, Divisor: g.Divisor})
				if err != nil {
					if row.Estimated {
						t.Errorf("%s %+v: Scale refuses (%v), the sweep estimates", name, row, err)
					}
					continue
				}
				r := engine.Evaluate(v)
				tb := tr
				tb.Batch, tb.Precision = row.Batch, row.Precision
				var m engine.Memory
				r.Memory(tb, a, &m)
				f := engine.SolveCapacity(r, &m, tb)
				if row.Params != r.Totals.Params || row.MACs != r.Totals.MACs || row.Estimated != m.Estimated ||
					row.Input != (engine.Pair{H: v.Input.H, W: v.Input.W}) {
					t.Fatalf("%s %+v: evaluation gives %d params, %d MACs, estimated %v, input %v", name, row, r.Totals.Params, r.Totals.MACs, m.Estimated, v.Input)
				}
				if !m.Estimated {
					continue
				}
				if row.Peak != m.Total || row.Fits != m.Fits || row.MaxBatch != f.MaxBatch {
					t.Fatalf("%s %+v: memory estimate total %d fits %v, solver's largest batch %d", name, row, m.Total, m.Fits, f.MaxBatch)
				}
				checked++
			}
		}
	}
	if checked < 100 {
		t.Errorf("only %d estimated rows checked; the grids are too small to test much", checked)
	}
}

// TestSweepFrontier checks the frontier marks on random grids against a
// brute-force Pareto check of every pair of estimated rows.
func TestSweepFrontier(t *testing.T) {
	s := loadTestdata(t, "published/mobilenet-v2.yaml")
	rng := rand.New(rand.NewPCG(3, 4))
	for range 8 {
		g, tr := randomGrid(rng)
		rows := sweepAll(t, s, tr, g, 2)
		marked := 0
		for i, p := range rows {
			dominated := false
			for j, q := range rows {
				if i != j && q.Estimated && q.MACs <= p.MACs && q.Peak <= p.Peak && (q.MACs < p.MACs || q.Peak < p.Peak) {
					dominated = true
					break
				}
			}
			want := p.Estimated && !dominated
			if p.Frontier != want {
				t.Fatalf("row %+v: frontier %v, brute force %v", p, p.Frontier, want)
			}
			if want {
				marked++
			}
		}
		if marked == 0 && len(rows) > 0 && rows[0].Estimated {
			t.Errorf("no row on the frontier of %d", len(rows))
		}
	}
}

// TestSweepWorkersAgree checks that the rows do not depend on the worker
// count, and that a sweep larger than the profile cache (evaluated twice)
// gives the same rows as one within it.
func TestSweepWorkersAgree(t *testing.T) {
	s := loadTestdata(t, "published/resnet18.yaml")
	tr := engine.Training{Budget: 24 << 30, Optimizer: engine.AdamW}
	g := engine.Grid{Widths: []float64{0.5, 1, 1.5}, Depths: []float64{1, 2}, Resolutions: []float64{0.5, 1}, Batches: []int64{8, 256}, Precisions: []engine.Precision{engine.FP32, engine.BF16Mixed}}
	one := sweepAll(t, s, tr, g, 1)
	three := sweepAll(t, s, tr, g, 3)
	if len(one) != len(three) {
		t.Fatalf("%d rows with one worker, %d with three", len(one), len(three))
	}
	for i := range one {
		if one[i] != three[i] {
			t.Fatalf("row %d: %+v with one worker, %+v with three", i, one[i], three[i])
		}
	}
}

// TestSweepStops checks that yield's error stops the sweep and comes back.
func TestSweepStops(t *testing.T) {
	s := loadTestdata(t, "published/resnet18.yaml")
	stop := errors.New("enough")
	n := 0
	_, err := engine.Sweep(context.Background(), s, engine.Training{}, engine.DefaultAssumptions(),
		engine.Grid{Widths: []float64{1, 2}, Batches: []int64{1, 2, 3}}, 2, func(*engine.SweepRow) error {
			n++
			if n == 2 {
				return stop
			}
			return nil
		})
	if !errors.Is(err, stop) || n != 2 {
		t.Errorf("err %v after %d rows", err, n)
	}
	if _, err := engine.Sweep(context.Background(), s, engine.Training{}, engine.DefaultAssumptions(),
		engine.Grid{Widths: []float64{-1}}, 1, func(*engine.SweepRow) error { return nil }); err == nil {
		t.Error("a negative width is accepted")
	}
}

// BenchmarkSweepResNet50 sweeps ResNet-50 over 4 widths × 4 depths × 4
// resolutions (64 evaluations) × 8 batches × 3 precisions = 1,536
// variants on every core, and reports variants per second.
func BenchmarkSweepResNet50(b *testing.B) {
	s := loadTestdata(b, "published/resnet50.yaml")
	tr := engine.Training{Optimizer: engine.AdamW, Budget: 80 << 30}
	g := engine.Grid{
		Widths:      []float64{0.5, 0.75, 1, 1.25},
		Depths:      []float64{0.5, 1, 1.5, 2},
		Resolutions: []float64{0.75, 1, 1.25, 1.5},
		Batches:     []int64{16, 32, 64, 128, 256, 512, 1024, 2048},
		Precisions:  []engine.Precision{engine.FP32, engine.BF16Mixed, engine.BF16},
	}
	workers := runtime.NumCPU()
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		st, err := engine.Sweep(context.Background(), s, tr, engine.DefaultAssumptions(), g, workers, func(*engine.SweepRow) error { return nil })
		if err != nil {
			b.Fatal(err)
		}
		n += st.Variants
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "variants/s")
}

// BenchmarkSweepResNet50Shapes is the sweep's worst case: every variant a
// width × depth × resolution of its own (8 × 8 × 8, one batch, one
// precision), so each row costs a scaling and an evaluation.
func BenchmarkSweepResNet50Shapes(b *testing.B) {
	s := loadTestdata(b, "published/resnet50.yaml")
	tr := engine.Training{Optimizer: engine.AdamW, Budget: 80 << 30, Batch: 256, Precision: engine.BF16Mixed}
	var g engine.Grid
	for i := range 8 {
		g.Widths = append(g.Widths, 0.5+0.125*float64(i))
		g.Depths = append(g.Depths, 0.5+0.25*float64(i))
		g.Resolutions = append(g.Resolutions, 0.5+0.125*float64(i))
	}
	workers := runtime.NumCPU()
	var n int64
	b.ReportAllocs()
	for b.Loop() {
		st, err := engine.Sweep(context.Background(), s, tr, engine.DefaultAssumptions(), g, workers, func(*engine.SweepRow) error { return nil })
		if err != nil {
			b.Fatal(err)
		}
		n += st.Variants
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "variants/s")
}

// closeTo reports whether a and b agree to a relative 1e-9 (the closed
// form sums in another order than Time does).
func closeTo(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b))
}

// TestSweepTimeMatchesRoofline checks, on random grids with a device, a
// few random rows of each sweep against the roofline estimate the report
// takes: Scale the stack, Evaluate it and ask Result.Time at the row's
// batch and precision. The sweep's closed form over the batch must give
// the same step time and samples per second.
func TestSweepTimeMatchesRoofline(t *testing.T) {
	stacks := []*engine.Stack{
		loadTestdata(t, "published/resnet18.yaml"),
		loadTestdata(t, "published/mobilenet-v2.yaml"),
		loadTestdata(t, "published/efficientnet-b0.yaml"),
	}
	devs := engine.Devices()
	rng := rand.New(rand.NewPCG(5, 6))
	checked := 0
	for _, s := range stacks {
		for range 3 {
			g, tr := randomGrid(rng)
			tr.GPU = 1 + rng.IntN(len(devs))
			if rng.IntN(2) == 0 {
				tr.Efficiency[engine.ClassConv] = 0.2 + 0.6*rng.Float64() // a calibrated share
			}
			rows := sweepAll(t, s, tr, g, 2)
			for range 6 {
				row := rows[rng.IntN(len(rows))]
				if !row.Timed {
					t.Fatalf("%+v: a sweep with a device has no time", row)
				}
				v, err := engine.Scale(s, engine.Scaling{Width: row.Width, Depth: row.Depth, Resolution: row.Resolution, Divisor: g.Divisor})
				if err != nil || !row.Estimated {
					continue
				}
				r := engine.Evaluate(v)
				tb := tr
				tb.Batch, tb.Precision = row.Batch, row.Precision
				var tm engine.Time
				r.Time(tb, devs[tr.GPU-1], tb.Efficiencies(), &tm)
				if !tm.Estimated || !closeTo(row.Step, tm.Step) || !closeTo(row.SamplesPerSecond, tm.SamplesPerSecond) {
					t.Fatalf("%+v on %s: roofline step %g s, %g samples/s", row, devs[tr.GPU-1].Key, tm.Step, tm.SamplesPerSecond)
				}
				checked++
			}
		}
	}
	if checked < 20 {
		t.Errorf("only %d rows checked", checked)
	}
	// Without a device the rows carry no time.
	g, tr := randomGrid(rng)
	for _, row := range sweepAll(t, stacks[0], tr, g, 1) {
		if row.Timed || row.Step != 0 {
			t.Fatalf("%+v: time without a device", row)
		}
	}
}

// TestStepCurveMatchesTime checks the closed form against Result.Time
// over batches from 1 to 2²⁰, where layers cross from memory- to
// compute-bound, on every device and precision.
func TestStepCurveMatchesTime(t *testing.T) {
	s := loadTestdata(t, "published/mobilenet-v2.yaml")
	r := engine.Evaluate(s)
	var c engine.StepCurve
	var tm engine.Time
	for _, d := range engine.Devices() {
		for _, p := range engine.Precisions() {
			tr := engine.Training{Precision: p, GPUs: 4, Accumulate: 2, Shard: engine.ShardOptimizer}
			if !c.Build(r, tr, d, engine.DefaultEfficiency()) {
				t.Fatal("no curve")
			}
			for b := int64(1); b <= 1<<20; b = b*3 + 1 {
				tr.Batch = b
				r.Time(tr, d, engine.DefaultEfficiency(), &tm)
				if got := c.Step(b); !closeTo(got, tm.Step) {
					t.Fatalf("%s %s batch %d: curve %g s, Time %g s", d.Key, p, b, got, tm.Step)
				}
			}
		}
	}
}
