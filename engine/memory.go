package engine

import (
	"fmt"
	"math"
)

// Assumptions are the device facts the memory model needs that a stack
// file does not say. DefaultAssumptions describes a CUDA GPU.
type Assumptions struct {
	MaskBytes  int64 // bytes per dropout-mask element (1 on CUDA GPUs, 4 in PyTorch's CPU dropout)
	IndexBytes int64 // bytes per max-pooling index (int64)
}

// DefaultAssumptions returns the GPU figures: 1-byte dropout masks and
// 8-byte pooling indices, as PyTorch keeps them on CUDA devices.
func DefaultAssumptions() Assumptions { return Assumptions{MaskBytes: 1, IndexBytes: 8} }

// bytesPer gives the bytes per parameter of the weights (under autocast
// the fp32 parameter and its cached half-precision copy, 4 + 2; counted
// for every parameter, though norms' stay uncast), the gradient, the fp32
// master copy (master settings only) and one optimizer-state slot. See
// Precision for the schemes.
func bytesPer(p Precision) (weight, grad, master, slot int64) {
	switch p {
	case FP16Mixed, BF16Mixed:
		return 6, 4, 0, 4
	case FP16Master, BF16Master:
		return 2, 2, 4, 4
	case BF16:
		return 2, 2, 0, 2
	}
	return 4, 4, 0, 4
}

// ActivationBytes is the size of one stored activation value.
func ActivationBytes(p Precision) int64 {
	if p == FP32 {
		return 4
	}
	return 2
}

// OptimizerSlots is the optimizer state kept per parameter: SGD none,
// momentum one buffer, Adam and AdamW two moments, Adagrad one sum of
// squares, RMSprop one square average (PyTorch's defaults).
func OptimizerSlots(o Optimizer) int64 {
	switch o {
	case Momentum, Adagrad, RMSprop:
		return 1
	case Adam, AdamW:
		return 2
	}
	return 0
}

// ModelState returns the bytes of model state one GPU holds for params
// trainable parameters: weights (the compute copy and, under mixed
// precision, the fp32 master copy), gradients and optimizer state. With
// sharding over t.GPUs devices, the stages of Rajbhandari et al. 2020 split,
// in turn, the optimizer state (with the master copy), the gradients and the
// compute weights; a split share rounds up.
func ModelState(params int64, t Training) (weights, grads, opt int64) {
	w, g, m, slot := bytesPer(t.Precision)
	n := max(t.GPUs, 1)
	split := func(v int64, on bool) int64 {
		if !on {
			return v
		}
		return (v + n - 1) / n
	}
	var ov bool
	compute := split(mul(&ov, params, w), t.Shard >= ShardParameters)
	master := split(mul(&ov, params, m), t.Shard >= ShardOptimizer)
	grads = split(mul(&ov, params, g), t.Shard >= ShardGradients)
	opt = split(mul(&ov, params, mul(&ov, slot, OptimizerSlots(t.Optimizer))), t.Shard >= ShardOptimizer)
	if ov {
		return math.MaxInt64 / 4, math.MaxInt64 / 4, math.MaxInt64 / 4
	}
	return compute + master, grads, opt
}

// Memory is the estimated memory of one training step on one GPU, in bytes.
// It is an estimate: frameworks, kernels, allocator fragmentation and the
// CUDA runtime differ; keep the headroom.
type Memory struct {
	MicroBatch  int64 // samples per GPU per pass
	Weights     int64 // parameters (and fp32 master copy) plus buffers
	Gradients   int64
	Optimizer   int64
	Activations int64 // tensors kept for the backward pass
	Workspace   int64 // convolution workspace and the backward pass's gradient scratch
	Overhead    int64 // CUDA context and library handles
	Total       int64
	Budget      int64 // 0 when none
	Reserve     int64 // the part of the budget kept free (headroom)
	// Estimated is false when the stack has errors (the rows past the
	// first error count nothing, so the figures are partial) or has no
	// layers at all (there is nothing to train, so a verdict or a largest
	// batch would mean nothing). Then no verdict is given: Fits is false
	// and the fit solver gives no answers. Reason says why.
	Estimated   bool
	StackErrors int  // the errors that stopped the estimate (0 when Estimated)
	Empty       bool // the stack has no layers (Estimated is false)
	Fits        bool // Estimated and Total ≤ Budget − Reserve (true when estimated with no budget)

	ActPerSample     int64   // activation bytes per sample kept for backward
	ScratchPerSample int64   // what the step's peak adds to them per sample: live outputs and gradient buffers
	LivePerSample    int64   // most activation elements alive at once in inference, per sample
	Inference        int64   // weights at compute precision plus the largest set of live activations
	Rows             []int64 // activation bytes each row keeps, at the micro-batch

	// PeakPerSample is the step simulation's peak of activation memory per
	// sample (kept tensors, live outputs and gradient buffers); PeakPhase
	// and PeakRow say where it falls (PeakRow −1: an empty stack).
	// ScratchPerSample is what the peak adds to the kept tensors.
	PeakPerSample int64
	PeakPhase     Phase
	PeakRow       int

	seen []int32     // scratch: storage → last epoch counted
	sv   saving      // scratch: the saved-bytes counter
	step stepScratch // scratch: the step simulation
}

// Category names, in display order.
const (
	CatWeights     = "weights"
	CatGradients   = "gradients"
	CatOptimizer   = "optimizer"
	CatActivations = "activations"
	CatWorkspace   = "workspace"
	CatOverhead    = "overhead"
)

// Categories returns the per-category bytes in display order.
func (m *Memory) Categories() [6]struct {
	Name  string
	Bytes int64
} {
	return [6]struct {
		Name  string
		Bytes int64
	}{{CatWeights, m.Weights}, {CatGradients, m.Gradients}, {CatOptimizer, m.Optimizer},
		{CatActivations, m.Activations}, {CatWorkspace, m.Workspace}, {CatOverhead, m.Overhead}}
}

// Reason says why the memory is not estimated ("the stack has 2
// error(s)", "the stack is empty; add a layer for an estimate"), or ""
// when it is.
func (m *Memory) Reason() string {
	switch {
	case m.Estimated:
		return ""
	case m.StackErrors == 0 && m.Empty:
		return "the stack is empty; add a layer for an estimate"
	}
	return fmt.Sprintf("the stack has %d error(s)", m.StackErrors)
}

// Largest returns the name of the biggest category.
func (m *Memory) Largest() string {
	best, name := int64(-1), ""
	for _, c := range m.Categories() {
		if c.Bytes > best {
			best, name = c.Bytes, c.Name
		}
	}
	return name
}

// Memory estimates the training memory of the evaluated stack under t into
// m (reusing m's storage). Rows with unknown numbers count nothing; a
// stack with errors is not estimated (m.Estimated is false).
func (r *Result) Memory(t Training, a Assumptions, m *Memory) {
	rows := m.Rows[:0]
	m.MicroBatch = t.MicroBatch()
	perSample, scratch, peakLive := r.activationProfile(t, a, m, &rows)
	m.Rows = rows
	m.ActPerSample, m.ScratchPerSample, m.LivePerSample = perSample, scratch, peakLive
	m.Retarget(r, t)
}

// Retarget recomputes the categories for other batch, GPU and sharding
// settings of the same stack, reusing the per-sample profile (activation
// memory is affine in the batch). Rows keeps its earlier figures.
func (m *Memory) Retarget(r *Result, t Training) {
	m.MicroBatch = t.MicroBatch()
	m.fill(r, t)
}

// fill computes the categories from the per-sample profile.
func (m *Memory) fill(r *Result, t Training) {
	var ov bool
	e := ActivationBytes(t.Precision)
	m.Weights, m.Gradients, m.Optimizer = ModelState(r.Totals.Params, t)
	bufBytes := int64(4)
	if t.Precision == BF16 {
		bufBytes = 2
	}
	m.Weights = add(&ov, m.Weights, mul(&ov, r.Totals.Buffers, bufBytes))
	m.Activations = mul(&ov, m.ActPerSample, m.MicroBatch)
	m.Workspace = add(&ov, orDefault(t.Workspace, DefaultWorkspace), mul(&ov, m.ScratchPerSample, m.MicroBatch))
	m.Overhead = orDefault(t.Overhead, DefaultOverhead)
	total := int64(0)
	for _, c := range m.Categories() {
		total = add(&ov, total, c.Bytes)
	}
	w := ActivationBytes(t.Precision) // inference runs on the weights in the compute precision
	m.Inference = add(&ov, add(&ov, mul(&ov, r.Totals.Params, w), mul(&ov, r.Totals.Buffers, bufBytes)), mul(&ov, mul(&ov, m.LivePerSample, e), m.MicroBatch))
	if ov {
		total = math.MaxInt64
	}
	m.Total = total
	m.Budget = t.Budget
	m.Reserve = int64(math.Ceil(float64(t.Budget) * t.HeadroomShare()))
	// With errors the rows past the first one count nothing: partial
	// figures are no estimate, and give no verdict. An empty stack has
	// nothing to train: no verdict either.
	m.Empty = len(r.Rows) == 0
	m.Estimated, m.StackErrors = r.Errors == 0 && !m.Empty, r.Errors
	m.Fits = m.Estimated && (t.Budget == 0 || (!ov && m.Total <= t.Budget-m.Reserve))
}

// activationProfile walks the rows once and returns the activation bytes
// kept per sample, the backward scratch per sample and the largest number
// of activation elements alive at once in a forward pass without gradients
// (per sample). It appends each row's kept bytes at the micro-batch to rows.
//
// What a row keeps is its kind's rule (Spec.saved), following what
// PyTorch's autograd saves (calibrated with
// torch.autograd.graph.saved_tensors_hooks, testdata/reference):
// convolutions, dense layers and norms keep their input; each activation
// its output or its input, as its entry in activations says; pooling its
// input, max pooling also int64 indices per output value; group, instance
// and layer norm their per-sample statistics too; dropout its mask;
// upsampling, flatten, reshape and merges nothing. A tensor kept by two rows
// counts once. Rows before the first layer with parameters keep nothing
// unless they have parameters themselves: no gradient flows there.
// With checkpointing every k rows, only each k-th row's output is kept,
// plus the largest segment's tensors while it is recomputed (Chen et al.
// 2016).
func (r *Result) activationProfile(t Training, a Assumptions, m *Memory, rows *[]int64) (perSample, scratch, peakLive int64) {
	e := ActivationBytes(t.Precision)
	n := len(r.Rows)
	if cap(m.seen) < n+1 {
		m.seen = make([]int32, n+1)
	}
	seen := m.seen[:n+1]
	for i := range seen {
		seen[i] = -1
	}
	micro := m.MicroBatch
	sv := &m.sv
	sv.a, sv.e, sv.seen, sv.epoch, sv.ov = a, e, seen, 0, false
	sv.autocast = t.Precision == FP16Mixed || t.Precision == BF16Mixed
	k := int64(t.Checkpoint)
	m.step.reset(n, k > 0)
	sv.step = &m.step
	sv.rows, sv.in = r.Rows, r.Input
	ov := &sv.ov
	var segment, segMax, kept int64
	for i := range r.Rows {
		row := &r.Rows[i]
		var b int64
		if row.Status == StatusOK {
			sv.row, sv.stored = int32(i), 0
			b = r.savedBytes(row, sv)
			if k <= 0 {
				sv.step.extras[i] = b - sv.stored // masks, indices, statistics
			}
		}
		sv.step.note(r, i, e, ov)
		*rows = append(*rows, mul(ov, b, micro))
		if k <= 0 {
			perSample = add(ov, perSample, b)
			continue
		}
		segment = add(ov, segment, b)
		if int64(i+1)%k == 0 || i == n-1 {
			// Segment boundary: its output stays; its insides are recomputed.
			segMax = max(segMax, segment)
			if row.Status == StatusOK && i != n-1 {
				out, _ := row.Out.Elements()
				kept = add(ov, kept, mul(ov, out, e))
			}
			sv.step.segment(r, i, int(k), segment)
			segment = 0
			sv.epoch++
		}
	}
	if k > 0 {
		perSample = add(ov, kept, segMax)
	}
	// The step's peak beyond the kept tensors, simulated (under
	// checkpointing with each segment recomputed before its backward).
	p := r.simulateStep(&m.step, e, ov)
	m.PeakPhase, m.PeakRow = p.phase, p.row
	scratch = max(p.bytes-perSample, 0)
	peakLive = p.infer / e
	m.PeakPerSample = add(ov, perSample, scratch)
	if *ov {
		return math.MaxInt64 / 8, 0, 0
	}
	return perSample, scratch, peakLive
}

// saving is what a kind's saved-bytes rule needs: the device facts, the
// bytes per activation value and a way to count each tensor once.
type saving struct {
	a     Assumptions
	e     int64
	seen  []int32 // storage → last epoch counted
	epoch int32   // checkpoint segment being counted
	ov    bool    // a product overflowed
	rows  []Row   // the rows, for the size of a storage
	in    Shape   // the network input

	autocast bool // mixed precision as torch.autocast runs it (see savedNorm)

	step   *stepScratch // where each kept tensor is recorded (nil: not simulated)
	row    int32        // the row being counted
	stored int64        // its bytes counted as tensors (the rest are extras)
}

// keep counts a tensor (by storage) once per epoch and returns its bytes.
func (s *saving) keep(store int32, elems int64) int64 {
	if s.seen[store+1] == s.epoch {
		return 0
	}
	s.seen[store+1] = s.epoch
	b := mul(&s.ov, elems, s.e)
	s.stored += b
	if s.step != nil && !s.step.ckpt {
		s.step.savedAt[store+1] = s.row
	}
	return b
}

// input counts the row's input tensor: its whole storage, which is larger
// than the input where a split fork's branch reads a view of its share.
func (s *saving) input(row *Row) int64 {
	n, _ := row.In.Elements()
	st := s.in
	if row.InStore >= 0 && int(row.InStore) < len(s.rows) {
		st = s.rows[row.InStore].Out
	}
	if m, _ := st.Elements(); m > n {
		n = m
	}
	return s.keep(row.InStore, n)
}

// output counts the row's output tensor.
func (s *saving) output(row *Row) int64 {
	n, _ := row.Out.Elements()
	return s.keep(row.OutStore, n)
}

// savedBytes returns the bytes per sample row keeps for the backward pass,
// by its kind's rule.
func (r *Result) savedBytes(row *Row, s *saving) int64 {
	if !row.Grad && !row.OtherGrad && row.Params <= 0 {
		return 0 // no gradient reaches here and nothing to learn
	}
	if sp := SpecOf(row.Layer.Kind); sp.saved != nil {
		return sp.saved(row, s)
	}
	return 0
}
