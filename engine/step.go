package engine

// The step simulation: one training step's activation memory over time,
// per sample, from the rows' tensor identities (InStore, OutStore,
// OtherStore) and what each row keeps for backward.
//
// Forward, in row order: each output is allocated at its row and lives
// until its last reader, unless some row keeps it for backward; what a row
// keeps besides tensors (masks, indices, statistics) is allocated at the
// row. Backward, in reverse: the gradient of the loss (a sum) is the size
// of the output; at each row that gradient flows through, the gradients
// of its inputs are allocated (a tensor read by several rows — a residual
// block's input, a skip — gets one buffer at its last reader, later
// contributions are added through a transient of its size), then the
// gradient of its output and the tensors only it kept are freed (autograd
// frees a node's saved tensors once its backward has run). An addition
// and a concatenation pass views of their output's gradient on, so they
// move the gradient rather than copy it. The peak of the live bytes over
// both passes, and where it falls, is the answer.
//
// Parameter gradients do not grow with the batch; they are counted whole
// in the gradients category (as after the first step, when every .grad
// exists). Kernels' own scratch (a GPU's convolution workspace, a CPU
// kernel's transient copies) is the workspace category, kept apart.

// Phase says in which pass of a training step a peak falls.
type Phase uint8

// Phases.
const (
	PhaseForward Phase = iota
	PhaseBackward
)

// String names the phase.
func (p Phase) String() string {
	if p == PhaseBackward {
		return "backward"
	}
	return "forward"
}

// stepScratch is the simulation's reusable storage, kept in Memory so a
// recompute allocates nothing.
type stepScratch struct {
	savedAt  []int32 // storage → row whose backward releases it (−1: not kept)
	lastUse  []int32 // storage → last forward reader
	extras   []int64 // row → bytes kept besides tensors
	gradLive []bool  // storage → its gradient buffer exists
	size     []int64 // storage → bytes
	rows     []stepRow
	dLive    []int64 // row → change of the forward pass's live bytes at it
	// Checkpointing (Chen et al. 2016): the forward pass keeps only each
	// segment's output; before a segment's backward its forward runs
	// again and keeps what it normally would, recompute[end] bytes,
	// released once the segment's first row is done (release[first]).
	ckpt      bool
	jn        int     // the next of Result.joins that note reads
	recompute []int64 // row → bytes a segment ending here keeps when recomputed
	release   []int64 // row → bytes released after the backward of a segment starting here
}

// stepRow is what the simulation reads of a row, packed so its passes
// stay in cache.
type stepRow struct {
	in, other, out int32 // storages; other is −3 when the row reads none
	flags          uint8
}

// stepRow flags.
const (
	srOK       = 1 << iota // the row's numbers are known
	srBackward             // a gradient flows through it (Grad, OtherGrad or parameters)
	srGrad                 // its input needs a gradient
	srOtherG               // its second input needs one
	srPasses               // an addition or concatenation: passes views of its gradient on
	srJoin                 // a fork's join: reads its branches' outputs (Result.joins)
)

func (st *stepScratch) reset(n int, ckpt bool) {
	grow := func(s []int32) []int32 {
		if cap(s) < n+1 {
			return make([]int32, n+1)
		}
		return s[:n+1]
	}
	st.savedAt, st.lastUse = grow(st.savedAt), grow(st.lastUse)
	if cap(st.extras) < n {
		st.extras = make([]int64, n)
	}
	st.extras = st.extras[:n]
	if cap(st.gradLive) < n+1 {
		st.gradLive = make([]bool, n+1)
	}
	st.gradLive = st.gradLive[:n+1]
	if cap(st.size) < n+1 {
		st.size = make([]int64, n+1)
	}
	st.size = st.size[:n+1]
	if cap(st.rows) < n {
		st.rows = make([]stepRow, n)
	}
	st.rows = st.rows[:n]
	if cap(st.dLive) < n+1 {
		st.dLive = make([]int64, n+1)
	}
	st.dLive = st.dLive[:n+1]
	st.ckpt, st.jn = ckpt, 0
	if ckpt {
		if cap(st.recompute) < n {
			st.recompute, st.release = make([]int64, n), make([]int64, n)
		}
		st.recompute, st.release = st.recompute[:n], st.release[:n]
		clear(st.recompute)
		clear(st.release)
	}
	for i := range st.savedAt {
		st.savedAt[i], st.lastUse[i], st.gradLive[i] = -1, -1, false
	}
	clear(st.extras)
}

// maxStepBytes bounds one tensor's bytes per sample in the simulation:
// with at most 2²⁰ rows its sums of such sizes cannot overflow, so they
// are plain additions. A larger tensor marks the estimate overflowed.
const maxStepBytes = 1 << 42

// stepPeak is the simulation's answer, per sample.
type stepPeak struct {
	bytes int64
	phase Phase
	row   int   // the row at which the peak falls (−1: none)
	infer int64 // the most bytes alive at once in a forward pass that keeps nothing (inference)
}

// simulateStep walks one training step over the rows and returns its
// activation peak per sample; e is the bytes per activation value and
// st holds what activationProfile found each row keeps.
func (r *Result) simulateStep(st *stepScratch, e int64, ov *bool) stepPeak {
	n := uint32(len(r.Rows))
	size := st.size // and st.lastUse: filled by note, row by row
	rows := st.rows
	last := int32(n) - 1
	for last >= 0 && rows[last].flags&srOK == 0 {
		last--
	}
	if last < 0 {
		return stepPeak{row: -1}
	}
	final := rows[last].out
	peak := stepPeak{row: -1}

	// Forward, from per-row changes: a storage is allocated at the row
	// that writes it (the input before the first) and, unless kept for
	// backward, freed after its last reader. The same array first gives
	// the pass keeping nothing for backward (inference), then the
	// training pass.
	d := st.dLive
	var inferPeak, liveEnd int64
	for pass := 0; pass < 2; pass++ {
		clear(d)
		for k := range st.lastUse {
			s := int32(k - 1)
			last := st.lastUse[k]
			at := 0
			if s >= 0 {
				if rows[s].flags&srOK == 0 || rows[s].out != s {
					continue // no storage of its own (an error, or a view)
				}
				at = int(s)
			} else if last < 0 && (pass == 0 || st.savedAt[0] < 0) {
				continue // the input, never read
			}
			if pass == 0 && last < 0 {
				continue
			}
			d[at] += size[k]
			switch {
			case pass == 0:
				d[last+1] -= size[k]
			case last >= 0 && st.savedAt[k] < 0 && s != final:
				d[last+1] -= size[k]
			}
		}
		var live int64
		for i := range rows {
			live += d[i]
			if pass == 1 {
				live += st.extras[i]
			}
			if rows[i].flags&srOK == 0 {
				continue
			}
			if pass == 0 {
				inferPeak = max(inferPeak, live)
			} else if live > peak.bytes {
				peak = stepPeak{bytes: live, phase: PhaseForward, row: i}
			}
		}
		if pass == 1 {
			liveEnd = live + d[len(rows)]
		}
	}
	live := liveEnd
	// What each row's backward releases: its masks, indices and
	// statistics, and the kept tensors only it still needed (extras is
	// done with as such; it holds these now).
	release := st.extras
	for k, at := range st.savedAt {
		if at >= 0 && int(at) < len(rows) {
			release[at] += size[k]
		}
	}
	peak.infer = inferPeak

	// Backward: the loss's gradient, then each row in reverse.
	if uint32(final+1) <= n {
		st.gradLive[final+1] = true
		live = live + size[final+1]
	}
	if live > peak.bytes {
		peak = stepPeak{bytes: live, phase: PhaseBackward, row: int(last), infer: inferPeak}
	}
	jc := len(r.joins) // the joins' branch outputs, walked back with the rows
	for i := int(last); i >= 0; i-- {
		p := &rows[i]
		if p.flags&srOK == 0 || p.flags&srBackward == 0 {
			continue
		}
		if st.ckpt && st.recompute[i] > 0 {
			live = live + st.recompute[i] // the segment's forward again
		}
		out := p.out
		view := out == p.in // flatten, reshape: the same storage, the same gradient
		ownsOut := !view && out == int32(i)
		// An addition or a concatenation passes views of its output's
		// gradient to its inputs: the gradient moves, it is not copied.
		passes := p.flags&srPasses != 0
		if passes && ownsOut && st.gradLive[out+1] {
			st.gradLive[out+1] = false
			live -= size[out+1]
		}
		transient := int64(0)
		if p.flags&srJoin != 0 {
			// A join passes its output's gradient to every branch.
			for jc > 0 && r.joins[jc-1].row > int32(i) {
				jc--
			}
			for ; jc > 0 && r.joins[jc-1].row == int32(i); jc-- {
				if j := r.joins[jc-1]; j.grad {
					live, transient = st.gradInput(j.store, n, live, transient)
				}
			}
		}
		for j, s := range [2]int32{p.in, p.other} {
			needed := p.flags&srGrad != 0
			if j == 1 {
				needed = p.flags&srOtherG != 0
			}
			if !needed || uint32(s+1) > n || view && s == p.in {
				continue
			}
			live, transient = st.gradInput(s, n, live, transient)
		}
		if at := live + transient; at > peak.bytes {
			peak = stepPeak{bytes: at, phase: PhaseBackward, row: i, infer: inferPeak}
		}
		if !passes && ownsOut && st.gradLive[out+1] {
			st.gradLive[out+1] = false
			live -= size[out+1]
		}
		// What only this row kept is released after its backward.
		live -= release[i]
		if st.ckpt {
			live -= st.release[i]
		}
	}
	return peak
}

// gradInput makes the gradient of storage s exist at a row's backward:
// a new buffer, or, where one exists, a transient added into it. It
// returns the live bytes and the largest transient so far.
func (st *stepScratch) gradInput(s int32, n uint32, live, transient int64) (int64, int64) {
	if uint32(s+1) > n {
		return live, transient
	}
	if st.gradLive[s+1] {
		return live, max(transient, st.size[s+1]) // added into the buffer there
	}
	st.gradLive[s+1] = true
	return live + st.size[s+1], transient
}

// note packs row i and records its output size and its reads, as
// activationProfile walks the rows.
func (st *stepScratch) note(r *Result, i int, e int64, ov *bool) {
	row := &r.Rows[i]
	if i == 0 {
		v, _ := r.Input.Elements()
		st.size[0] = mul(ov, v, e)
	}
	v, _ := row.Out.Elements()
	st.size[i+1] = mul(ov, v, e)
	if st.size[i+1] > maxStepBytes {
		*ov = true // the simulation's sums stay far from overflow below this
	}
	p := stepRow{in: row.InStore, other: -3, out: row.OutStore}
	if row.Status != StatusOK {
		st.rows[i] = p
		return
	}
	p.flags = srOK
	if readsOther(row) && row.Role != RoleJoin {
		p.other = row.OtherStore
		if row.OtherGrad {
			p.flags |= srOtherG
		}
	}
	if row.Grad || row.OtherGrad || row.Params > 0 {
		p.flags |= srBackward
	}
	if row.Grad && row.Role != RoleJoin {
		p.flags |= srGrad
	}
	if row.Role == RoleJoin {
		// A join reads its branches' outputs (each alive until here, each
		// given a gradient here), not the fork's input: that the branches
		// read.
		p.in, p.flags = -3, p.flags|srJoin
		for st.jn < len(r.joins) && r.joins[st.jn].row < int32(i) {
			st.jn++
		}
		for k := st.jn; k < len(r.joins) && r.joins[k].row == int32(i); k++ {
			if s := r.joins[k].store; uint32(s+1) <= uint32(len(r.Rows)) {
				st.lastUse[s+1] = max(st.lastUse[s+1], int32(i))
			}
		}
	}
	if row.Role == RoleResidual || row.Role == RoleJoin || row.Role == RoleDenseCat || row.Layer.Kind == KindAdd || row.Layer.Kind == KindConcat {
		p.flags |= srPasses
	}
	st.rows[i] = p
	n := uint32(len(r.Rows))
	at := int32(i)
	if uint32(p.in+1) <= n {
		st.lastUse[p.in+1] = max(st.lastUse[p.in+1], at)
	}
	if uint32(p.other+1) <= n {
		st.lastUse[p.other+1] = max(st.lastUse[p.other+1], at)
	}
	if uint32(p.out+1) <= n {
		st.lastUse[p.out+1] = max(st.lastUse[p.out+1], at)
	}
}

// segment records a checkpoint segment that ends at row end (k rows at
// most) and keeps saved bytes when recomputed: its output is kept by the
// forward pass until the next segment's backward is done.
func (st *stepScratch) segment(r *Result, end, k int, saved int64) {
	first := end - (end % k)
	st.recompute[end] = saved
	st.release[first] = saved
	if row := &r.Rows[end]; row.Status == StatusOK && end != len(r.Rows)-1 && row.OutStore == int32(end) {
		st.savedAt[end+1] = int32(end + 1)
	}
}

// readsOther reports whether a row reads a second tensor (OtherStore): a
// merge, a gate's multiplication, a fork's join.
func readsOther(row *Row) bool {
	return row.Layer.Kind.IsMerge() || row.Role == RoleGate || row.Role == RoleJoin
}

// PeakWhere says where the step's activation memory peaks: "backward at
// 6.1.1" ("" when not estimated, "nowhere" for a stack with nothing to
// keep). r is the result m was computed from.
func (m *Memory) PeakWhere(r *Result) string {
	switch {
	case !m.Estimated:
		return ""
	case m.PeakRow < 0 || m.PeakRow >= len(r.Rows):
		return "nowhere"
	}
	return m.PeakPhase.String() + " at " + r.Rows[m.PeakRow].Path.String()
}

// dropScratch lets the storage of the saved-bytes walk and the step
// simulation go: a memory estimate that will not be recomputed need not
// hold it (a million-row stack's is about 70 MB).
func (m *Memory) dropScratch() {
	m.seen, m.sv, m.step = nil, saving{}, stepScratch{}
}
