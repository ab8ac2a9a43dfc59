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

// Role says where a row comes from.
type Role uint8

// Row roles.
const (
	RoleLayer    Role = iota // a layer written in the stack
	RoleShortcut             // a projection shortcut a residual block adds
	RoleResidual             // the addition that closes a residual repeat
	RolePostAct              // the activation after that addition
	RoleGate                 // the multiplication that applies a gate
	RoleDenseCat             // the concatenation that closes a densely linked repeat
	RoleJoin                 // the concatenation of a fork's branches
)

var roleNames = [...]string{"layer", "shortcut", "residual-add", "after-add", "gate-multiply", "dense-concat", "branch-join"}

// String returns the role's report name.
func (r Role) String() string {
	if int(r) < len(roleNames) {
		return roleNames[r]
	}
	return "layer"
}

// FPair is a per-axis real number (receptive fields and jumps become
// fractional after upsampling).
type FPair struct {
	H, W float64
}

// Row holds the computed numbers of one layer.
type Row struct {
	Path      Path
	Layer     *Layer // the layer in the evaluated stack, with the stack's defaults applied
	In, Out   Shape  // per-sample input and output shapes
	Status    Status
	Role      Role  // what the row is: a written layer or one a residual block adds
	Unstrided bool  // a later repeat of a block: strides inside count as 1
	Params    int64 // trainable parameters
	Buffers   int64 // non-trainable state (running statistics)
	MACs      int64 // multiply-accumulates per sample
	CumParams int64 // parameters of this and every earlier row
	RF        FPair // receptive field in input pixels
	Jump      FPair // distance in input pixels between adjacent outputs

	// Tensor identities for the memory model: the row whose output storage
	// this row reads (InStore), writes (OutStore; views keep their input's)
	// and, for merges, reads as its second input (OtherStore). −1 is the
	// network input.
	InStore, OutStore, OtherStore int32
	// Grad: the input carries a gradient (some earlier row has parameters);
	// OtherGrad: so does a merge's or a gate's second input.
	Grad, OtherGrad bool
	// InChannelsLast: the input is stored channels-last (after a layer
	// norm or a per-position dense layer in the export's PyTorch form).
	InChannelsLast bool
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
	Notes    int // diagnostics of SevInfo

	tally tally
	quiet uint64 // bit c set: warnings of code c are silenced (Stack.Quiet)
	stack *Stack
	taps  map[string]tap // named outputs seen so far
	// unitsUsed: the units the stack's uses name (for WarnUnitUnused),
	// kept between evaluations as taps is
	unitsUsed map[string]bool
	synth     synthPool // layers residual blocks add, reused between evaluations

	top       flow                          // the stack's own flow
	gates     [MaxBlockDepth + 1]flow       // each open gate's flow, by depth
	other     flow                          // the gate a multiplication row applies
	shortcut  flow                          // the shortcut's output, for the residual addition row
	forkIn    [MaxBlockDepth + 1]flow       // each open fork's input, by depth
	joined    [MaxBlockDepth + 1]flow       // each open fork's branches joined so far
	branch    [MaxBlockDepth + 1]flow       // the flow of each open fork's current branch
	ref       [MaxBlockDepth + 1]int64      // input channels of each open body (relative widths)
	blockRef  [MaxBlockDepth + 1]int64      // input channels of each open block repeat
	forkCheck forkCheck                     // what the join row being computed reports
	pending   [MaxBlockDepth + 1][]joinRead // each open fork's branch outputs so far
	joins     []joinRead                    // every join row's branch outputs, in row order
	fixed     fixedLayers                   // layers residual blocks add that never change
	defaulted defaultedLayers               // the stack's layers with its defaults applied
	calc      calc                          // the per-row calculator, reused
}

// MaxRows bounds how many rows a stack may expand to (repeats multiply).
const MaxRows = 1 << 20

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
	store int32 // row whose output storage holds the tensor; −1 the input
	ok    bool
	grad  bool // the tensor carries a gradient
	cl    bool // stored channels-last
}

// tally gathers what the whole-stack checks need while rows are computed.
type tally struct {
	ov           bool // a total overflowed
	weighted     int  // rows with parameters
	biggest      int  // row with the most parameters
	lastWeighted int  // last row of a kind with a chosen width
}

// Evaluate recomputes r for stack s, reusing r's storage.
func (r *Result) Evaluate(s *Stack) {
	r.Rows = r.Rows[:0]
	r.Diags = r.Diags[:0]
	r.joins = r.joins[:0]
	r.Totals = Totals{}
	r.Errors, r.Warnings, r.Notes = 0, 0, 0
	r.Input = s.Input
	r.stack = s
	r.quiet = 0
	for _, c := range s.Quiet {
		if c < 64 {
			r.quiet |= 1 << c
		}
	}
	r.synth.reset()
	r.fixed.init(s.Defaults)
	if r.taps == nil {
		r.taps = make(map[string]tap)
	} else {
		clear(r.taps)
	}
	r.Output = Shape{}
	// The flow lives in the Result: the kinds' rules take it through a
	// function value, which would move a local one to the heap.
	r.top = flow{shape: s.Input, rf: FPair{1, 1}, jump: FPair{1, 1}, store: -1, ok: true}
	f := &r.top
	if !s.Input.Valid() {
		f.ok = false
		r.inputError(s.Input)
	}
	r.tally = tally{biggest: -1, lastWeighted: -1}
	r.ref[0], r.blockRef[0] = s.Input.C, s.Input.C
	if n := countRows(s.Layers, 0); n > MaxRows {
		r.diag(Diagnostic{Severity: SevError, Code: ErrTooManyRows, Row: -1, Field: "repeat", A: n, B: MaxRows})
		r.finish()
		return
	} else if int(n) > cap(r.Rows) {
		r.Rows = make([]Row, 0, n) // one allocation instead of doubling
	}
	layers := s.Layers
	if len(s.Defaults) > 0 {
		// The defaults are read on every evaluation, never baked into the
		// layers: rows point into this copy, which holds each layer as
		// it computes.
		layers = r.defaulted.build(s.Layers, s.Defaults)
	}
	r.items(layers, Path{}, f, false)
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

// diag records d and counts it. It stays out of line: diagnostics are the
// cold path, and inlining the append into every check bloats the hot ones.
//
//go:noinline
func (r *Result) diag(d Diagnostic) {
	if d.Severity == SevWarning && d.Code < 64 && r.quiet&(1<<d.Code) != 0 {
		return // the stack silences this warning
	}
	switch d.Severity {
	case SevError:
		r.Errors++
	case SevWarning:
		r.Warnings++
	default:
		r.Notes++
	}
	r.Diags = append(r.Diags, d)
}

// items evaluates a list of layers (the stack, or one repeat of a block).
func (r *Result) items(ls []Layer, parent Path, f *flow, unstrided bool) {
	for i := range ls {
		l := &ls[i]
		switch {
		case l.Kind == KindBlock && parent.Len() < 2*MaxBlockDepth-1:
			r.block(l, parent, i+1, f, unstrided)
		case l.Kind == KindGate && parent.Len() < 2*MaxBlockDepth-1:
			r.gate(l, parent, i+1, f, unstrided)
		case l.Kind == KindFork && parent.Len() < 2*MaxBlockDepth-1:
			r.fork(l, parent, i+1, f, unstrided)
		default:
			r.layer(l, &parent, seg(i+1), f, unstrided, RoleLayer)
		}
		if l.Name != "" {
			r.setTap(l, f)
		}
	}
}

// layer appends the row of layer l, segment sg below parent, and advances
// the flow.
func (r *Result) layer(l *Layer, parent *Path, sg uint16, f *flow, unstrided bool, role Role) {
	idx := len(r.Rows)
	if idx < cap(r.Rows) {
		r.Rows = r.Rows[:idx+1]
	} else {
		r.Rows = append(r.Rows, Row{})
	}
	row := &r.Rows[idx]
	// The path is built in place: composing it on the stack and copying it
	// costs a store-forwarding stall per row.
	row.Path = *parent
	if n := parent.n; n < MaxDepth {
		row.Path.seg[n] = sg
		row.Path.n = n + 1
	}
	row.Layer, row.In, row.Status, row.Role, row.Unstrided = l, f.shape, StatusOK, role, unstrided
	row.InStore, row.OtherStore, row.Grad, row.OtherGrad = f.store, -1, f.grad, false
	row.InChannelsLast = f.cl
	row.Out, row.Params, row.Buffers, row.MACs = Shape{}, 0, 0, 0
	if !f.ok {
		row.Status = StatusUnresolved
		row.In, row.RF, row.Jump, row.OutStore = Shape{}, FPair{}, FPair{}, -1
		return
	}
	// The calculator lives in the Result and is set field by field: a
	// composite literal here is built in a temporary and copied, which
	// stalls on store forwarding once per row.
	c := &r.calc
	c.r, c.idx, c.row, c.l, c.unstrided = r, idx, row, l, unstrided
	sp := SpecOf(l.Kind)
	c.sp = sp
	c.failed, c.unresolved, c.ov = false, false, false
	if !sp.keepLayout {
		f.cl = false
	}
	c.run(f)
	if c.unresolved || c.failed {
		row.Status = StatusUnresolved
		if c.failed {
			row.Status = StatusError
		}
		row.Out, row.RF, row.Jump, row.OutStore = Shape{}, FPair{}, FPair{}, -1
		row.Params, row.Buffers, row.MACs = 0, 0, 0
		f.ok = false
		return
	}
	f.shape = row.Out
	row.RF, row.Jump = f.rf, f.jump
	if !sp.View {
		f.store = int32(idx) // every kind but a view writes a new tensor
	}
	row.OutStore = f.store
	f.grad = f.grad || row.Params > 0
	r.count(idx, row, l.Kind, role)
}

// count adds an OK row to the totals and runs the per-row stack checks. The
// width check of a weighted row waits until the next weighted row appears,
// because the last one is exempt.
func (r *Result) count(idx int, row *Row, k Kind, role Role) {
	t := &r.tally
	if row.Params|row.Buffers|row.MACs != 0 {
		r.Totals.Params = add(&t.ov, r.Totals.Params, row.Params)
		r.Totals.Buffers = add(&t.ov, r.Totals.Buffers, row.Buffers)
		r.Totals.MACs = add(&t.ov, r.Totals.MACs, row.MACs)
		if row.Params > 0 {
			t.weighted++
			if t.biggest < 0 || row.Params > r.Rows[t.biggest].Params {
				t.biggest = idx
			}
		}
	}
	row.CumParams = r.Totals.Params
	if k.HasWeights() && role == RoleLayer {
		if t.lastWeighted >= 0 {
			r.checkWidth(t.lastWeighted)
		}
		t.lastWeighted = idx
	}
}

// checkWidth warns when a weighted row's width is not a multiple of 8.
func (r *Result) checkWidth(i int) {
	row := &r.Rows[i]
	if row.Out.C%8 == 0 {
		return
	}
	field := "filters"
	if m := SpecOf(row.Layer.Kind).Main; m != nil {
		field = m.Key
	}
	r.diag(Diagnostic{Severity: SevWarning, Code: WarnChannels8, Row: i, Field: field, A: row.Out.C, B: RoundToMultiple(row.Out.C, 8)})
}

// finish runs the whole-stack checks and orders the diagnostics by row.
func (r *Result) finish() {
	t := &r.tally
	if r.Errors > 0 {
		var cum int64
		for i := range r.Rows {
			if r.Rows[i].Status == StatusOK {
				cum = r.Rows[i].CumParams
			} else {
				r.Rows[i].CumParams = cum
			}
		}
	}
	if t.ov {
		r.diag(Diagnostic{Severity: SevError, Code: ErrOverflow, Row: len(r.Rows) - 1, Field: "stack totals"})
	}
	// The share of the parameters is read from the totals, which miss
	// every row past an error: no share warning while errors exist.
	if b := t.biggest; r.Errors == 0 && b >= 0 && t.weighted >= 2 && 2*r.Rows[b].Params > r.Totals.Params {
		p := r.Rows[b].Params
		pct := int64(math.Round(100 * float64(p) / float64(r.Totals.Params)))
		r.diag(Diagnostic{Severity: SevWarning, Code: WarnParamShare, Row: b, Field: "parameters", A: p, B: r.Totals.Params, C: pct})
	}
	// A stack whose output keeps a spatial map (a segmenter, a detector's
	// grid) gives one answer per position, each meant to see a part of
	// the image: only a single-position output should see all of it.
	if last := len(r.Rows) - 1; r.Errors == 0 && last >= 0 && r.Rows[last].Out.H <= 1 && r.Rows[last].Out.W <= 1 {
		rf := r.Rows[last].RF
		in := r.Input
		if int64(rf.H) < in.H || int64(rf.W) < in.W {
			r.diag(Diagnostic{Severity: SevWarning, Code: WarnFinalRF, Row: last, Field: "receptive field",
				A: int64(rf.H), B: int64(rf.W), C: in.H, D: in.W})
		}
	}
	if len(r.stack.Units) > 0 {
		if r.unitsUsed == nil {
			r.unitsUsed = map[string]bool{}
		}
		clear(r.unitsUsed)
		markUses(r.stack.Layers, r.unitsUsed)
		for i := range r.stack.Units {
			if n := r.stack.Units[i].Name; !r.unitsUsed[n] {
				r.diag(Diagnostic{Severity: SevWarning, Code: WarnUnitUnused, Row: -1, Field: "units", Name: n})
			}
		}
	}
	byRow := func(a, b Diagnostic) int { return a.Row - b.Row }
	if !slices.IsSortedFunc(r.Diags, byRow) {
		slices.SortStableFunc(r.Diags, byRow)
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
	if d.Code == WarnUnitUnused {
		return "units: " + d.Message()
	}
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

// markUses records the units the uses in ls (their expansions included)
// name.
func markUses(ls []Layer, used map[string]bool) {
	for i := range ls {
		if ls[i].Unit != "" {
			used[ls[i].Unit] = true
		}
		markUses(ls[i].Body, used)
	}
}
