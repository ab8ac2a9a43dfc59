package engine

import (
	"cmp"
	"slices"
)

// OpClass is the class of operation a layer's kernels belong to; each has
// its own efficiency (the share of the device's peak a real kernel reaches).
type OpClass uint8

// Operation classes.
const (
	ClassNone    OpClass = iota // no work (views, containers)
	ClassConv                   // dense convolution
	ClassGrouped                // depthwise or grouped convolution
	ClassMatrix                 // matrix product (dense layers)
	ClassMemory                 // element-wise, normalisation, pooling, the optimizer step
	classCount
)

var classNames = [...]string{"none", "convolution", "grouped convolution", "matrix product", "element-wise"}

// String names the class.
func (c OpClass) String() string {
	if int(c) < len(classNames) {
		return classNames[c]
	}
	return "invalid"
}

// Efficiency is, per class, the share of the device's peak (FLOP/s and
// bytes/s alike) that its kernels are assumed to reach.
type Efficiency [classCount]float64

// DefaultEfficiency returns the assumed shares: dense convolutions 50%,
// depthwise and grouped 25% (they feed tensor cores poorly), matrix
// products 60%, memory-bound kernels 70% of the memory bandwidth. They are
// assumptions of the kind practitioners quote for tuned library kernels on
// large tensors (from memory), not measurements: measure yours.
func DefaultEfficiency() Efficiency {
	return Efficiency{ClassNone: 1, ClassConv: 0.5, ClassGrouped: 0.25, ClassMatrix: 0.6, ClassMemory: 0.7}
}

// Work is what one row does per sample: its class, the FLOPs of the
// forward and backward passes, and the activation elements each pass reads
// and writes. Weight traffic is added per pass from the row's parameters.
// A kind's Spec gives its rule; a kind without one is element-wise (see
// elementWork).
type Work struct {
	Class              OpClass
	FwdFLOPs, BwdFLOPs float64
	FwdRead, FwdWrite  float64 // activation elements
	BwdRead, BwdWrite  float64
}

// rowWork returns the row's work per sample from its kind's rule.
func rowWork(row *Row) Work {
	s := SpecOf(row.Layer.Kind)
	switch {
	case s.Body || s.Branches || row.Layer.Kind == KindBranch || s.View:
		return Work{}
	case s.work != nil:
		return s.work(row)
	}
	return elementWork(row, 1)
}

// elementWork is the rule of element-wise kinds (activations, dropout,
// scaling, shuffles, upsampling, gates): flops FLOPs per output element
// forward and as many backward; forward reads the input and writes the
// output, backward reads the output's gradient and the saved input and
// writes the input's gradient. With no gradient to pass on, a row without
// parameters has no backward pass.
func elementWork(row *Row, flops float64) Work {
	in, out := float64(elems(row.In)), float64(elems(row.Out))
	w := Work{Class: ClassMemory, FwdFLOPs: flops * out, FwdRead: in, FwdWrite: out}
	if row.Grad || row.Params > 0 {
		w.BwdFLOPs, w.BwdRead, w.BwdWrite = flops*out, out+in, in
	}
	return w
}

// weightedWork is the rule of convolutions and dense layers: a MAC is 2
// FLOPs; backward computes the weight gradient (2 FLOPs per MAC, reading
// the output's gradient and the saved input) and, when the input needs
// one, the input gradient (2 more, writing it): about twice the forward.
func weightedWork(row *Row, class OpClass) Work {
	m := 2 * float64(row.MACs)
	in, out := float64(elems(row.In)), float64(elems(row.Out))
	w := Work{Class: class, FwdFLOPs: m, FwdRead: in, FwdWrite: out, BwdFLOPs: m, BwdRead: out + in}
	if row.Grad {
		w.BwdFLOPs += m
		w.BwdWrite = in
	}
	return w
}

// Bound says what limits a layer: its arithmetic or its memory traffic.
type Bound uint8

// Bounds.
const (
	BoundNone    Bound = iota // the layer does no work
	BoundCompute              // FLOPs/peak ≥ bytes/bandwidth: above the ridge point
	BoundMemory               // bytes/bandwidth > FLOPs/peak
)

// String returns "compute", "memory" or "none".
func (b Bound) String() string {
	switch b {
	case BoundCompute:
		return "compute"
	case BoundMemory:
		return "memory"
	}
	return "none"
}

// LayerTime is one row's estimated time for one micro-batch on one GPU.
type LayerTime struct {
	Class              OpClass
	FwdFLOPs, BwdFLOPs float64 // per micro-batch
	FwdBytes, BwdBytes float64 // per micro-batch
	Forward, Backward  float64 // seconds
	Bound              Bound
}

// Time is the estimated time of one training step: a roofline model
// (Williams, Waterman & Patterson 2009) per layer — max(FLOPs / peak, bytes /
// bandwidth), divided by the class's efficiency — summed over the layers,
// times the accumulation steps, plus the optimizer step and the part of the
// gradient all-reduce not hidden behind the backward pass. It is an
// ESTIMATE: it assumes the efficiencies hold, no stalls waiting for data,
// no launch or framework overhead, and the all-reduce overlapping the last
// micro-batch's backward pass; keep headroom.
type Time struct {
	Device     Device
	Efficiency Efficiency
	Estimated  bool // false when the stack has errors or no layers (see Memory.Reason)

	MicroBatch, Accumulate, GPUs, Batch int64
	Layers                              []LayerTime // one per row of the result

	Forward, Backward float64 // seconds per micro-batch, summed over the layers
	Compute           float64 // Accumulate × (Forward + Backward)
	Optimizer         float64 // the optimizer step over this GPU's parameters
	OptimizerBytes    float64
	AllReduce         float64 // the gradient all-reduce (0 on one GPU)
	AllReduceBytes    float64 // gradient bytes reduced
	Exposed           float64 // the part of AllReduce the backward pass does not hide
	Step              float64 // Compute + Optimizer + Exposed
	SamplesPerSecond  float64 // Batch / Step
	ComputeBound      float64 // seconds of Compute spent in compute-bound layers

	Dataset       int64   // samples per epoch (0: not given)
	StepsPerEpoch int64   // ⌈Dataset / Batch⌉
	Epoch         float64 // seconds, StepsPerEpoch × Step
}

// RingAllReduce returns the seconds a ring all-reduce of bytes over n GPUs
// takes when each GPU sends (and receives) at perDirection bytes/s: every
// GPU sends 2(n−1)/n of the data (a reduce-scatter, then an all-gather).
func RingAllReduce(bytes float64, n int64, perDirection float64) float64 {
	if n <= 1 || perDirection <= 0 {
		return 0
	}
	return 2 * float64(n-1) / float64(n) * bytes / perDirection
}

// optimizerAccesses is the bytes the optimizer step reads and writes per
// parameter: the weight read and written (the fp32 master copy where the
// scheme keeps one, which also writes the half-precision copy), the
// gradient read, and each state slot read and written.
func optimizerAccesses(t Training) float64 {
	w, g, m, slot := bytesPer(t.Precision)
	weight := float64(w)
	switch t.Precision {
	case FP16Mixed, BF16Mixed:
		weight = 4 // the fp32 parameter; autocast recasts the copy in the forward pass
	}
	b := 2*weight + float64(g) + 2*float64(slot*OptimizerSlots(t.Optimizer))
	if m > 0 {
		b += 2*float64(m) - weight // read and write the master copy, write the half weight once
	}
	return b
}

// weightBytes returns the bytes per parameter a forward pass reads (under
// autocast the fp32 weight read, its half copy written and read) and a
// backward pass moves (the compute weight read, the gradient written).
func weightBytes(p Precision) (fwd, bwd float64) {
	_, g, _, _ := bytesPer(p)
	switch p {
	case FP32:
		return 4, 4 + float64(g)
	case FP16Mixed, BF16Mixed:
		return 4 + 2 + 2, 2 + float64(g)
	}
	return 2, 2 + float64(g)
}

// Time estimates the time of one training step under t on device d with
// the efficiencies eff, into tm (reusing its storage).
func (r *Result) Time(t Training, d Device, eff Efficiency, tm *Time) {
	layers := tm.Layers[:0]
	*tm = Time{Device: d, Efficiency: eff, Layers: layers,
		MicroBatch: t.MicroBatch(), Accumulate: max(t.Accumulate, 1), GPUs: max(t.GPUs, 1), Batch: max(t.Batch, 1),
		Dataset: t.Dataset}
	tm.Estimated = r.Errors == 0 && len(r.Rows) > 0
	if !tm.Estimated {
		return
	}
	n := float64(tm.MicroBatch)
	act := float64(ActivationBytes(t.Precision))
	wf, wb := weightBytes(t.Precision)
	for i := range r.Rows {
		row := &r.Rows[i]
		var lt LayerTime
		if row.Status == StatusOK {
			w := rowWork(row)
			lt.Class = w.Class
			p := float64(row.Params)
			lt.FwdFLOPs, lt.BwdFLOPs = n*w.FwdFLOPs, n*w.BwdFLOPs
			lt.FwdBytes = n*act*(w.FwdRead+w.FwdWrite) + p*wf
			lt.BwdBytes = n * act * (w.BwdRead + w.BwdWrite)
			if w.BwdFLOPs > 0 {
				lt.BwdBytes += p * wb
			}
			lt.Forward, lt.Backward, lt.Bound = roofline(d, eff, w.Class, t.Precision, lt)
		}
		tm.Forward += lt.Forward
		tm.Backward += lt.Backward
		if lt.Bound == BoundCompute {
			tm.ComputeBound += lt.Forward + lt.Backward
		}
		tm.Layers = append(tm.Layers, lt)
	}
	a := float64(tm.Accumulate)
	tm.Compute = a * (tm.Forward + tm.Backward)
	tm.ComputeBound *= a

	params := float64(r.Totals.Params)
	if t.Shard >= ShardOptimizer {
		params /= float64(tm.GPUs) // each GPU updates its share
	}
	tm.OptimizerBytes = params * optimizerAccesses(t)
	if d.Bandwidth > 0 && eff[ClassMemory] > 0 {
		tm.Optimizer = tm.OptimizerBytes / (d.Bandwidth * eff[ClassMemory])
	}
	_, g, _, _ := bytesPer(t.Precision)
	tm.AllReduceBytes = float64(r.Totals.Params) * float64(g)
	tm.AllReduce = RingAllReduce(tm.AllReduceBytes, tm.GPUs, d.Link/2)
	tm.Exposed = max(0, tm.AllReduce-tm.Backward)
	tm.Step = tm.Compute + tm.Optimizer + tm.Exposed
	if tm.Step > 0 {
		tm.SamplesPerSecond = float64(tm.Batch) / tm.Step
	}
	if tm.Dataset > 0 {
		tm.StepsPerEpoch = (tm.Dataset + tm.Batch - 1) / tm.Batch
		tm.Epoch = float64(tm.StepsPerEpoch) * tm.Step
	}
}

// roofline returns the forward and backward seconds of one row's work and
// what bounds it: each pass takes max(FLOPs / peak, bytes / bandwidth),
// divided by the class's efficiency; the row is compute-bound when its
// FLOPs take at least as long as its bytes over both passes.
func roofline(d Device, eff Efficiency, c OpClass, p Precision, lt LayerTime) (fwd, bwd float64, b Bound) {
	peak, bw, e := d.Peak(c, p), d.Bandwidth, eff[c]
	if c == ClassNone || peak <= 0 || bw <= 0 || e <= 0 {
		return 0, 0, BoundNone
	}
	pass := func(flops, bytes float64) float64 { return max(flops/peak, bytes/bw) / e }
	fwd, bwd = pass(lt.FwdFLOPs, lt.FwdBytes), pass(lt.BwdFLOPs, lt.BwdBytes)
	switch ct, mt := (lt.FwdFLOPs+lt.BwdFLOPs)/peak, (lt.FwdBytes+lt.BwdBytes)/bw; {
	case ct == 0 && mt == 0:
		b = BoundNone
	case ct >= mt:
		b = BoundCompute
	default:
		b = BoundMemory
	}
	return fwd, bwd, b
}

// Top returns the indices of the n rows that take the most time, longest
// first (ties by row order).
func (tm *Time) Top(n int) []int {
	idx := make([]int, 0, len(tm.Layers))
	for i, l := range tm.Layers {
		if l.Forward+l.Backward > 0 {
			idx = append(idx, i)
		}
	}
	slices.SortStableFunc(idx, func(a, b int) int {
		la, lb := tm.Layers[a], tm.Layers[b]
		return cmp.Compare(lb.Forward+lb.Backward, la.Forward+la.Backward)
	})
	return idx[:min(n, len(idx))]
}

// elems is a shape's element count as a real number (an overflowing
// count is clamped: such a row is an error anyway).
func elems(s Shape) float64 {
	n, _ := s.Elements()
	return float64(n)
}
