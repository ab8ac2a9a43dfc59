package engine_test

import (
	"context"
	"math/rand/v2"
	"runtime"
	"slices"
	"strconv"
	"testing"

	"stackfit/engine"
)

// TestFitMapMatchesSolver checks cells of maps of published stacks
// against the slow path: Scale the stack to the cell, Evaluate it,
// estimate its memory and ask the fit solver for the largest batch.
func TestFitMapMatchesSolver(t *testing.T) {
	a := engine.DefaultAssumptions()
	rng := rand.New(rand.NewPCG(5, 6))
	for _, name := range []string{"resnet18", "mobilenet-v2", "efficientnet-b0"} {
		s := loadTestdata(t, "published/"+name+".yaml")
		tr := s.Training
		tr.Batch = int64(1 + rng.IntN(256))
		tr.Budget = int64(4+rng.IntN(60)) << 30
		tr.Precision = engine.Precisions()[rng.IntN(len(engine.Precisions()))]
		ax := engine.DefaultFitMapAxes(s, 6)
		if rng.IntN(2) == 0 {
			ax.Depth = 1.5
		}
		fm, err := engine.BuildFitMap(context.Background(), s, tr, a, ax, 2)
		if err != nil {
			t.Fatal(err)
		}
		if len(fm.Cells) != len(ax.Widths)*len(ax.Sizes) {
			t.Fatalf("%s: %d cells for %d×%d", name, len(fm.Cells), len(ax.Widths), len(ax.Sizes))
		}
		some := 0
		for range 8 {
			r, c := rng.IntN(len(fm.Sizes)), rng.IntN(len(fm.Widths))
			cell := fm.At(r, c)
			if cell.Width != ax.Widths[c] || cell.Input.H != ax.Sizes[r] {
				t.Fatalf("%s: cell (%d,%d) is width %v input %v, the axes say %v and %d", name, r, c, cell.Width, cell.Input, ax.Widths[c], ax.Sizes[r])
			}
			v, err := engine.Scale(s, cell.Scaling(0))
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			res := engine.Evaluate(v)
			tb := tr
			tb.Batch = fm.Axes.Batch
			var m engine.Memory
			res.Memory(tb, a, &m)
			f := engine.SolveCapacity(res, &m, tb)
			if cell.Params != res.Totals.Params || cell.MACs != res.Totals.MACs || cell.Estimated != m.Estimated {
				t.Fatalf("%s (%d,%d): cell %+v, evaluation %d params %d MACs estimated %v", name, r, c, cell, res.Totals.Params, res.Totals.MACs, m.Estimated)
			}
			if cell.Peak != m.Total || cell.MaxBatch != f.MaxBatch {
				t.Fatalf("%s (%d,%d): cell peak %d largest batch %d; solver %d and %d", name, r, c, cell.Peak, cell.MaxBatch, m.Total, f.MaxBatch)
			}
			if cell.MaxBatch > 0 {
				some++
			}
		}
		if some == 0 {
			t.Logf("%s: no checked cell fits", name)
		}
	}
}

// TestFitMapCurrent: the stack as it stands is the cell at width ×1 and
// its own input, and its largest batch is the solver's for the stack.
func TestFitMapCurrent(t *testing.T) {
	s := loadTestdata(t, "published/resnet50.yaml")
	tr := s.Training
	tr.Budget = 40 << 30
	tr.Batch = 64
	for _, n := range []int{4, 7, 16} {
		fm, err := engine.BuildFitMap(context.Background(), s, tr, engine.DefaultAssumptions(), engine.DefaultFitMapAxes(s, n), 1)
		if err != nil {
			t.Fatal(err)
		}
		if fm.Current < 0 {
			t.Fatalf("n=%d: the stack's own cell is not on the map (widths %v, sizes %v)", n, fm.Widths, fm.Sizes)
		}
		c := fm.Cells[fm.Current]
		if c.Width != 1 || c.Input != (engine.Pair{H: s.Input.H, W: s.Input.W}) {
			t.Fatalf("n=%d: current cell is %+v", n, c)
		}
		an := engine.Analyze(s, tr, engine.DefaultAssumptions())
		if c.MaxBatch != an.Fit.MaxBatch || c.Peak != an.Memory.Total {
			t.Fatalf("n=%d: current cell largest batch %d peak %d; the stack's %d and %d", n, c.MaxBatch, c.Peak, an.Fit.MaxBatch, an.Memory.Total)
		}
	}
	ax := engine.DefaultFitMapAxes(s, 7)
	ax.Widths = []float64{0.5, 2}
	fm, err := engine.BuildFitMap(context.Background(), s, tr, engine.DefaultAssumptions(), ax, 1)
	if err != nil {
		t.Fatal(err)
	}
	if fm.Current != -1 {
		t.Fatalf("width ×1 is not on the map, yet cell %d is marked current", fm.Current)
	}
}

func TestFitMapAxes(t *testing.T) {
	sz := engine.FitMapSizes(engine.Shape{C: 3, H: 224, W: 224}, 8)
	if !slices.Equal(sz, []int64{160, 192, 224, 256, 288, 320, 352, 384}) {
		t.Errorf("sizes around 224: %v", sz)
	}
	if sz := engine.FitMapSizes(engine.Shape{C: 1, H: 8, W: 8}, 16); sz[0] < 1 || !slices.Contains(sz, 8) || len(sz) != 16 {
		t.Errorf("sizes around 8: %v", sz)
	}
	if ws := engine.FitMapWidths(7); !slices.Equal(ws, []float64{0.5, 0.75, 1, 1.25, 1.5, 1.75, 2}) {
		t.Errorf("7 widths: %v", ws)
	}
	if ws := engine.FitMapWidths(16); !slices.Contains(ws, 1) || ws[0] != 0.5 || ws[15] != 2 {
		t.Errorf("16 widths: %v", ws)
	}
}

func TestFitMapBatch(t *testing.T) {
	for n, want := range map[int64]string{0: "-", 7: "7", 999: "999", 1000: "1k", 1999: "1k", 99999: "99k",
		100000: ".1M", 999999: ".9M", 1_000_000: "1M", 123_456_789: ".1G", 1 << 62: "4E"} {
		if got := engine.FitMapBatch(n); got != want || len(got) > 3 {
			t.Errorf("FitMapBatch(%d) = %q, want %q", n, got, want)
		}
	}
}

// BenchmarkFitMapResNet50 is the editor's map: 16 widths × 16 input sizes
// of ResNet-50 with a budget, on one worker and on every CPU.
func BenchmarkFitMapResNet50(b *testing.B) {
	s := loadTestdata(b, "published/resnet50.yaml")
	tr := s.Training
	tr.Budget, tr.Batch = 80<<30, 256
	ax := engine.DefaultFitMapAxes(s, 16)
	for _, workers := range []int{1, runtime.GOMAXPROCS(0)} {
		b.Run("workers="+strconv.Itoa(workers), func(b *testing.B) {
			for b.Loop() {
				if _, err := engine.BuildFitMap(context.Background(), s, tr, engine.DefaultAssumptions(), ax, workers); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
