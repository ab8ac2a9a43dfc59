package engine

import (
	"context"
	"fmt"
	"math"
	"strconv"
)

// FitMapAxes are the two axes of a fit map: width multipliers across,
// input sizes down. Depth and batch are held: 0 means the stack's own
// depth (×1) and the training's own batch.
type FitMapAxes struct {
	Widths  []float64 // width multipliers (ScaleWidth), one column each
	Sizes   []int64   // input heights, one row each; the input's width follows in proportion
	Depth   float64   // depth multiplier (ScaleDepth); 0 means 1
	Batch   int64     // global batch the step peak is given at; 0 means the training's
	Divisor int64     // widths are rounded to multiples of it; 0 means 8
}

// MaxFitMapSide is the most widths or sizes a fit map takes.
const MaxFitMapSide = 32

// FitCell is one variant of a fit map: its scaling and figures. Memory
// figures are the training-memory estimate (Result.Memory).
type FitCell struct {
	Width, Depth, Resolution float64 // as Scaling takes them
	Input                    Pair    // the variant's input height and width
	Params, MACs             int64   // MACs per sample, one forward pass
	Peak                     int64   // estimated step peak per GPU at the map's batch, bytes
	MaxBatch                 int64   // largest global batch that fits the budget (SolveCapacity's); 0: none
	Estimated                bool    // false: the variant has no estimate (Problem says why)
	Problem                  string
}

// Scaling is the transform that turns the stack into this variant (Scale).
func (c *FitCell) Scaling(divisor int64) Scaling {
	return Scaling{Width: c.Width, Depth: c.Depth, Resolution: c.Resolution, Divisor: divisor}
}

// FitMap is the largest batch that fits a budget over a grid of widths
// and input sizes.
type FitMap struct {
	Widths []float64
	Sizes  []Pair     // each row's input
	Cells  []FitCell  // row by row: Cells[row·len(Widths)+column]
	Axes   FitMapAxes // as given, with Depth and Batch filled in
	Budget int64
	// Current is the index of the cell that is the stack as it stands
	// (width ×1, its own input, depth ×1); −1 when the axes miss it.
	Current int
}

// At returns the cell of row r (size) and column c (width).
func (f *FitMap) At(r, c int) *FitCell { return &f.Cells[r*len(f.Widths)+c] }

// FitMapWidths returns n width multipliers spread evenly from ×0.5 to ×2
// (×1 among them when n is 4, 7, 10, 13 or 16); n is at least 2.
func FitMapWidths(n int) []float64 {
	n = max(n, 2)
	ws := make([]float64, n)
	for i := range ws {
		ws[i] = math.Round((0.5+1.5*float64(i)/float64(n-1))*1000) / 1000
	}
	return ws
}

// FitMapSizes returns n input heights around the input's own: a quarter
// of them below it (as far as 1 allows), the rest above, a step apart of
// about a seventh of the height rounded to a multiple of 8 (1 for inputs
// under 16). The input's own height is always among them.
func FitMapSizes(in Shape, n int) []int64 {
	h := max(in.H, 1)
	step := int64(1)
	if h >= 16 {
		step = max(int64(math.Round(float64(h)/7/8))*8, 8)
	}
	below := min(int64(n/4), (h-1)/step)
	out := make([]int64, 0, n)
	for k := -below; len(out) < n; k++ {
		v := h + k*step
		if v > MaxSpatial {
			break
		}
		out = append(out, v)
	}
	return out
}

// DefaultFitMapAxes returns n widths (FitMapWidths) by n sizes
// (FitMapSizes) around s's input.
func DefaultFitMapAxes(s *Stack, n int) FitMapAxes {
	return FitMapAxes{Widths: FitMapWidths(n), Sizes: FitMapSizes(s.Input, n)}
}

// BuildFitMap estimates every cell of the map: s scaled to the cell's
// width, depth and input size (as Scale does), its memory under t at the
// map's batch, and the fit solver's largest batch for t's budget. The
// cells come from one Sweep (each variant evaluated once, workers
// goroutines sharing them); ctx stops it.
func BuildFitMap(ctx context.Context, s *Stack, t Training, a Assumptions, ax FitMapAxes, workers int) (*FitMap, error) {
	if len(ax.Widths) == 0 || len(ax.Sizes) == 0 || len(ax.Widths) > MaxFitMapSide || len(ax.Sizes) > MaxFitMapSide {
		return nil, fmt.Errorf("%w: a fit map takes 1 to %d widths and sizes (got %d and %d)", ErrTransform, MaxFitMapSide, len(ax.Widths), len(ax.Sizes))
	}
	if !s.Input.Spatial() {
		return nil, fmt.Errorf("%w: the input %v has no height and width to scale", ErrTransform, s.Input)
	}
	if ax.Depth == 0 {
		ax.Depth = 1
	}
	if ax.Batch <= 0 {
		ax.Batch = max(t.Batch, 1)
	}
	res := make([]float64, len(ax.Sizes))
	for i, h := range ax.Sizes {
		if h < 1 {
			return nil, fmt.Errorf("%w: input size %d must be 1 or more", ErrTransform, h)
		}
		res[i] = float64(h) / float64(s.Input.H)
	}
	g := Grid{Widths: ax.Widths, Depths: []float64{ax.Depth}, Resolutions: res, Batches: []int64{ax.Batch},
		Precisions: []Precision{t.Precision}, Divisor: ax.Divisor}
	nw, nr := len(ax.Widths), len(ax.Sizes)
	f := &FitMap{Widths: ax.Widths, Sizes: make([]Pair, nr), Cells: make([]FitCell, nw*nr), Axes: ax, Budget: t.Budget, Current: -1}
	for i := range res {
		f.Sizes[i] = ResolutionSize(s.Input, res[i])
	}
	_, err := Sweep(ctx, s, t, a, g, workers, func(r *SweepRow) error {
		// Grid order: width, then resolution (one depth, batch, precision).
		wi, ri := int(r.Index)/nr, int(r.Index)%nr
		f.Cells[ri*nw+wi] = FitCell{Width: r.Width, Depth: r.Depth, Resolution: r.Resolution, Input: r.Input,
			Params: r.Params, MACs: r.MACs, Peak: r.Peak, MaxBatch: r.MaxBatch, Estimated: r.Estimated, Problem: r.Problem}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if ax.Depth == 1 {
		for ri, sz := range f.Sizes {
			for wi, w := range ax.Widths {
				if w == 1 && sz == (Pair{s.Input.H, s.Input.W}) {
					f.Current = ri*nw + wi
				}
			}
		}
	}
	return f, nil
}

// FitMapBatch writes a largest batch in at most three characters,
// rounded down so a shown figure always fits: 0–999 as they are, then
// 1k–99k, .1M–.9M (hundreds of thousands), 1M–99M, .1G and so on; "-"
// for none.
func FitMapBatch(n int64) string {
	if n <= 0 {
		return "-"
	}
	if n < 1000 {
		return strconv.FormatInt(n, 10)
	}
	units := []string{"k", "M", "G", "T", "P", "E"}
	u := int64(1000)
	for i, name := range units[:len(units)-1] {
		if n/u < 100 {
			return strconv.FormatInt(n/u, 10) + name
		}
		if n/u < 1000 {
			return "." + strconv.FormatInt(n/(100*u), 10) + units[i+1]
		}
		u *= 1000
	}
	return strconv.FormatInt(n/u, 10) + "E"
}
