package engine

import (
	"fmt"
	"math"
	"slices"
)

// Status says whether a row's numbers are known.
type Status uint8

// Row statuses.
const (
	StatusOK         Status = iota // numbers computed
	StatusError                    // this layer has an error; numbers past it are unknown
	StatusUnresolved               // an earlier error left this layer's input unknown
)

// String returns "ok", "error" or "unresolved".
func (s Status) String() string {
	switch s {
	case StatusError:
		return "error"
	case StatusUnresolved:
		return "unresolved"
	}
	return "ok"
}

// FPair is a per-axis real number (receptive fields and jumps become
// fractional after upsampling).
type FPair struct {
	H, W float64
}

// Row holds the computed numbers of one layer.
type Row struct {
	Path      Path
	Layer     *Layer // the layer in the evaluated stack
	In, Out   Shape  // per-sample input and output shapes
	Status    Status
	Params    int64 // trainable parameters
	Buffers   int64 // non-trainable state (running statistics)
	MACs      int64 // multiply-accumulates per sample
	CumParams int64 // parameters of this and every earlier row
	RF        FPair // receptive field in input pixels
	Jump      FPair // distance in input pixels between adjacent outputs
	PadBefore Pair  // resolved padding at the top / left
	PadAfter  Pair  // resolved padding at the bottom / right
}

// Totals sums the rows of a result.
type Totals struct {
	Params, Buffers, MACs int64
}

// Result is the evaluation of a stack. A Result can be reused: Evaluate
// overwrites it while keeping its slices' capacity, so re-evaluating after
// each edit allocates nothing once the slices are large enough.
type Result struct {
	Input    Shape
	Output   Shape // output of the last row, when resolved
	Rows     []Row
	Diags    []Diagnostic // ordered by row; Row −1 is the input
	Totals   Totals
	Errors   int
	Warnings int
}

// Evaluate computes every row of s into a new Result.
func Evaluate(s *Stack) *Result {
	r := &Result{}
	r.Evaluate(s)
	return r
}

// flow carries what passes from one layer to the next.
type flow struct {
	shape Shape
	rf    FPair
	jump  FPair
	ok    bool
}

// Evaluate recomputes r for stack s, reusing r's storage.
func (r *Result) Evaluate(s *Stack) {
	r.Rows = r.Rows[:0]
	r.Diags = r.Diags[:0]
	r.Totals = Totals{}
	r.Errors, r.Warnings = 0, 0
	r.Input = s.Input
	r.Output = Shape{}
	f := flow{shape: s.Input, rf: FPair{1, 1}, jump: FPair{1, 1}, ok: true}
	if !s.Input.Valid() {
		f.ok = false
		r.inputError(s.Input)
	}
	var root Path
	for i := range s.Layers {
		r.layer(&s.Layers[i], root.Append(i+1), &f)
	}
	if f.ok {
		r.Output = f.shape
	}
	r.finish()
}

func (r *Result) inputError(in Shape) {
	fields := [3]struct {
		name string
		v    int64
	}{{"input channels", in.C}, {"input height", in.H}, {"input width", in.W}}
	for _, fv := range fields {
		if fv.v < 1 {
			r.diag(Diagnostic{Severity: SevError, Code: ErrValue, Row: -1, Field: fv.name, A: fv.v, B: 1})
		}
	}
}

// diag records d and counts it.
func (r *Result) diag(d Diagnostic) {
	if d.Severity == SevError {
		r.Errors++
	} else {
		r.Warnings++
	}
	r.Diags = append(r.Diags, d)
}

// layer appends the row of one layer and advances the flow.
func (r *Result) layer(l *Layer, p Path, f *flow) {
	idx := len(r.Rows)
	r.Rows = append(r.Rows, Row{Path: p, Layer: l, In: f.shape})
	row := &r.Rows[idx]
	if !f.ok {
		row.Status = StatusUnresolved
		row.In = Shape{}
		return
	}
	c := calc{r: r, idx: idx, row: row, l: l}
	c.run(f)
	if c.failed {
		row.Status = StatusError
		row.Out = Shape{}
		row.Params, row.Buffers, row.MACs = 0, 0, 0
		f.ok = false
		return
	}
	f.shape = row.Out
	row.RF, row.Jump = f.rf, f.jump
}

// finish computes totals and the whole-stack warnings.
func (r *Result) finish() {
	var ov bool
	weighted, lastWeighted := 0, -1
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Status != StatusOK {
			row.CumParams = r.Totals.Params
			continue
		}
		r.Totals.Params = add(&ov, r.Totals.Params, row.Params)
		r.Totals.Buffers = add(&ov, r.Totals.Buffers, row.Buffers)
		r.Totals.MACs = add(&ov, r.Totals.MACs, row.MACs)
		row.CumParams = r.Totals.Params
		if row.Params > 0 {
			weighted++
		}
		if row.Layer.Kind.HasWeights() {
			lastWeighted = i
		}
	}
	n := len(r.Diags)
	if ov {
		r.diag(Diagnostic{Severity: SevError, Code: ErrOverflow, Row: len(r.Rows) - 1, Field: "stack totals"})
	}
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Status != StatusOK {
			continue
		}
		if weighted >= 2 && 2*row.Params > r.Totals.Params {
			pct := int64(math.Round(100 * float64(row.Params) / float64(r.Totals.Params)))
			r.diag(Diagnostic{Severity: SevWarning, Code: WarnParamShare, Row: i, Field: "parameters", A: row.Params, B: r.Totals.Params, C: pct})
		}
		if k := row.Layer.Kind; k.HasWeights() && i != lastWeighted && row.Out.C%8 != 0 {
			field := "filters"
			if k == KindDense {
				field = "units"
			}
			r.diag(Diagnostic{Severity: SevWarning, Code: WarnChannels8, Row: i, Field: field, A: row.Out.C, B: RoundToMultiple(row.Out.C, 8)})
		}
	}
	if last := len(r.Rows) - 1; r.Errors == 0 && last >= 0 {
		rf := r.Rows[last].RF
		in := r.Input
		if int64(rf.H) < in.H || int64(rf.W) < in.W {
			r.diag(Diagnostic{Severity: SevWarning, Code: WarnFinalRF, Row: last, Field: "receptive field",
				A: int64(rf.H), B: int64(rf.W), C: in.H, D: in.W})
		}
	}
	if len(r.Diags) > n {
		slices.SortStableFunc(r.Diags, func(a, b Diagnostic) int { return a.Row - b.Row })
	}
}

// RoundToMultiple rounds n to the nearest multiple of m (halves up), never
// below m.
func RoundToMultiple(n, m int64) int64 {
	if m <= 0 {
		return n
	}
	v := (n + m/2) / m * m
	if v < m {
		v = m
	}
	return v
}

// Describe returns the diagnostic's message prefixed by the layer it
// concerns, e.g. "layer 3 (conv \"stem\"): ...".
func (r *Result) Describe(d Diagnostic) string {
	return r.Where(d.Row) + ": " + d.Message()
}

// Where names a row for messages: its path, kind and name.
func (r *Result) Where(row int) string {
	if row < 0 || row >= len(r.Rows) {
		return "input"
	}
	rw := &r.Rows[row]
	if rw.Layer.Name != "" {
		return fmt.Sprintf("layer %s (%s %q)", rw.Path, rw.Layer.Kind, rw.Layer.Name)
	}
	return fmt.Sprintf("layer %s (%s)", rw.Path, rw.Layer.Kind)
}

// DiagsFor returns the diagnostics of one row (−1 for the input).
func (r *Result) DiagsFor(row int) []Diagnostic {
	lo, _ := slices.BinarySearchFunc(r.Diags, row, func(d Diagnostic, t int) int { return d.Row - t })
	hi := lo
	for hi < len(r.Diags) && r.Diags[hi].Row == row {
		hi++
	}
	return r.Diags[lo:hi]
}
