package engine

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// OpClass is the class of operation a layer's kernels belong to; each has
// its own efficiency (the share of the device's peak a real kernel reaches).
type OpClass uint8

// Operation classes.
const (
	ClassNone      OpClass = iota // no work (views, containers)
	ClassConv                     // dense convolution
	ClassGrouped                  // depthwise or grouped convolution
	ClassMatrix                   // matrix product (dense layers)
	ClassMemory                   // element-wise, pooling, the optimizer step
	ClassPointwise                // 1×1 convolution, stride 1, one group: a matrix product over positions
	ClassNorm                     // normalisation: a reduction over the map, then an element-wise pass
	classCount
)

var classNames = [...]string{"none", "convolution", "grouped convolution", "matrix product", "element-wise",
	"pointwise convolution", "normalisation"}

// String names the class.
func (c OpClass) String() string {
	if int(c) < len(classNames) {
		return classNames[c]
	}
	return "invalid"
}

// OpClasses lists the classes of operation that do work, in order.
func OpClasses() []OpClass {
	out := make([]OpClass, 0, classCount-ClassConv)
	for c := ClassConv; c < classCount; c++ {
		out = append(out, c)
	}
	return out
}

// Efficiency is, per class, the share of the device's peak (FLOP/s and
// bytes/s alike) that its kernels are assumed to reach.
type Efficiency [classCount]float64

// DefaultEfficiency returns the assumed shares: dense convolutions 50%
// (pointwise ones too), depthwise and grouped 25% (they feed tensor cores
// poorly), matrix products 60%, memory-bound kernels and normalisation 70%
// of the memory bandwidth. They are assumptions of the kind practitioners
// quote for tuned library kernels on large tensors (from memory), not
// measurements: measure yours.
func DefaultEfficiency() Efficiency {
	return Efficiency{ClassNone: 1, ClassConv: 0.5, ClassGrouped: 0.25, ClassMatrix: 0.6, ClassMemory: 0.7,
		ClassPointwise: 0.5, ClassNorm: 0.7}
}

// fallbackClass is the class whose calibrated efficiency a class without
// one of its own takes before the default: a pointwise convolution runs
// on the same library as the others, a normalisation is memory-bound.
var fallbackClass = [classCount]OpClass{ClassPointwise: ClassConv, ClassNorm: ClassMemory}

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
	case row.Role == RoleJoin && s.work != nil:
		return s.work(row) // a fork's join: the fork's rule
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

// passCurve is the time of one pass (forward or backward) summed over a
// stack's layers as a function of the micro-batch n, in closed form. Each
// layer takes max(k₁·n, k₂·n + c): k₁ its FLOPs per sample over the peak,
// k₂ its activation bytes per sample and c its weight bytes over the
// bandwidth, all divided by the efficiency. That is k₂·n + c up to the
// layer's breakpoint c / (k₁ − k₂) (memory-bound) and k₁·n past it
// (compute-bound), so the sum is convex and piecewise linear: slope and
// constant at n → 0, then, past each breakpoint (sorted), the slope grows
// by k₁ − k₂ and the constant drops by c. A batch costs a binary search.
type passCurve struct {
	slope0, const0 float64
	bps            []float64 // breakpoints, ascending
	dSlope, dConst []float64 // prefix sums over the breakpoints (one longer)
	pend           []curveBreak
}

type curveBreak struct{ at, slope, konst float64 }

func (c *passCurve) reset() {
	c.slope0, c.const0 = 0, 0
	c.bps, c.dSlope, c.dConst, c.pend = c.bps[:0], c.dSlope[:0], c.dConst[:0], c.pend[:0]
}

// add adds one layer's pass: k1 seconds per sample of arithmetic, k2
// seconds per sample and c seconds of memory traffic.
func (c *passCurve) add(k1, k2, konst float64) {
	switch {
	case k1 <= k2:
		c.slope0 += k2
		c.const0 += konst
	case konst <= 0:
		c.slope0 += k1
	default:
		c.slope0 += k2
		c.const0 += konst
		c.pend = append(c.pend, curveBreak{konst / (k1 - k2), k1 - k2, konst})
	}
}

// close sorts the breakpoints and sums them up.
func (c *passCurve) close() {
	slices.SortFunc(c.pend, func(a, b curveBreak) int { return cmp.Compare(a.at, b.at) })
	c.dSlope, c.dConst = append(c.dSlope, 0), append(c.dConst, 0)
	for i, b := range c.pend {
		c.bps = append(c.bps, b.at)
		c.dSlope = append(c.dSlope, c.dSlope[i]+b.slope)
		c.dConst = append(c.dConst, c.dConst[i]+b.konst)
	}
}

// at returns the pass's seconds at micro-batch n.
func (c *passCurve) at(n float64) float64 {
	i, _ := slices.BinarySearch(c.bps, n) // layers 0..i−1 are compute-bound at n
	return (c.slope0+c.dSlope[i])*n + max(0, c.const0-c.dConst[i])
}

// StepCurve is Time's step in closed form over the batch, for one stack,
// precision and device: built once from an evaluation (O(rows·log rows)),
// it gives the step time at any batch (O(log rows)), equal to Time's
// Step up to rounding. The sweep uses it for every batch of a variant.
type StepCurve struct {
	fwd, bwd         passCurve
	optimizer        float64
	allReduce        float64
	accumulate, gpus int64
	t                Training
	ok               bool
}

// Build makes c the step curve of r under t (whose batch is ignored) on d
// with the efficiencies eff. ok is false when Time would estimate nothing.
func (c *StepCurve) Build(r *Result, t Training, d Device, eff Efficiency) (ok bool) {
	c.fwd.reset()
	c.bwd.reset()
	c.t, c.accumulate, c.gpus = t, max(t.Accumulate, 1), max(t.GPUs, 1)
	c.ok = r.Errors == 0 && len(r.Rows) > 0
	if !c.ok {
		return false
	}
	act := float64(ActivationBytes(t.Precision))
	wf, wb := weightBytes(t.Precision)
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Status != StatusOK {
			continue
		}
		w := rowWork(row)
		peak, bw, e := d.Peak(w.Class, t.Precision), d.Bandwidth, eff[w.Class]
		if w.Class == ClassNone || peak <= 0 || bw <= 0 || e <= 0 {
			continue
		}
		p := float64(row.Params)
		c.fwd.add(w.FwdFLOPs/peak/e, act*(w.FwdRead+w.FwdWrite)/bw/e, p*wf/bw/e)
		cb := 0.0
		if w.BwdFLOPs > 0 {
			cb = p * wb / bw / e
		}
		c.bwd.add(w.BwdFLOPs/peak/e, act*(w.BwdRead+w.BwdWrite)/bw/e, cb)
	}
	c.fwd.close()
	c.bwd.close()
	params := float64(r.Totals.Params)
	if t.Shard >= ShardOptimizer {
		params /= float64(c.gpus)
	}
	c.optimizer = 0
	if d.Bandwidth > 0 && eff[ClassMemory] > 0 {
		c.optimizer = params * optimizerAccesses(t) / (d.Bandwidth * eff[ClassMemory])
	}
	_, g, _, _ := bytesPer(t.Precision)
	c.allReduce = RingAllReduce(float64(r.Totals.Params)*float64(g), c.gpus, d.Link/2)
	return true
}

// Step returns the seconds of one training step at the global batch
// (split over the GPUs and accumulation steps as Training.MicroBatch
// does); 0 when the curve estimates nothing.
func (c *StepCurve) Step(batch int64) float64 {
	if !c.ok {
		return 0
	}
	t := c.t
	t.Batch = batch
	n := float64(t.MicroBatch())
	f, b := c.fwd.at(n), c.bwd.at(n)
	return float64(c.accumulate)*(f+b) + c.optimizer + max(0, c.allReduce-b)
}

// classKeys are the classes' names in the efficiency setting.
var classKeys = [...]string{"", "conv", "grouped", "matrix", "memory", "pointwise", "norm"}

// ClassKey returns the class's name in the efficiency setting and in the
// calibration's output: conv, grouped, matrix, memory, pointwise or norm
// ("" for none).
func ClassKey(c OpClass) string {
	if int(c) < len(classKeys) {
		return classKeys[c]
	}
	return ""
}

// ClassByKey returns the class ClassKey names.
func ClassByKey(key string) (OpClass, bool) {
	c := slices.Index(classKeys[:], strings.ToLower(key))
	return OpClass(max(c, 0)), c >= int(ClassConv)
}

// MaxEfficiency bounds a calibrated efficiency: a share above 1 would mean
// the device beat its own peak (a measurement or table error).
const MaxEfficiency = 1.0

// FormatEfficiency writes the set classes' efficiencies as the stack
// file's efficiency setting reads them: "conv 42%, matrix 55%", three
// significant digits; "" when none is set.
func FormatEfficiency(e Efficiency) string {
	var parts []string
	for c := ClassConv; c < classCount; c++ {
		if e[c] > 0 {
			parts = append(parts, classKeys[c]+" "+strconv.FormatFloat(100*e[c], 'g', 3, 64)+"%")
		}
	}
	return strings.Join(parts, ", ")
}

// ParseEfficiency reads the efficiency setting: comma-separated pairs of a
// class (conv, grouped, matrix, memory, pointwise, norm) and a share above 0 and at most
// 100% ("conv 42%, memory 0.61"); empty text sets none.
func ParseEfficiency(text string) (Efficiency, error) {
	var e Efficiency
	for _, part := range strings.Split(text, ",") {
		f := strings.Fields(part)
		if len(f) == 0 {
			continue
		}
		c := slices.Index(classKeys[:], strings.ToLower(f[0]))
		if c < int(ClassConv) || len(f) != 2 {
			return Efficiency{}, fmt.Errorf("give pairs of a class (%s) and a share, e.g. conv 42%%, memory 61%%", strings.Join(classKeys[ClassConv:], ", "))
		}
		t := f[1]
		pct := strings.HasSuffix(t, "%")
		v, err := strconv.ParseFloat(strings.TrimSuffix(t, "%"), 64)
		if pct {
			v /= 100
		}
		if err != nil || math.IsNaN(v) || v <= 0 || v > MaxEfficiency {
			return Efficiency{}, fmt.Errorf("%s %s: give a share above 0%% and at most 100%%", f[0], t)
		}
		e[c] = v
	}
	return e, nil
}

// Achieved returns the efficiency a measurement shows: the time the
// roofline gives the work at the device's full peak (FLOPs at the class's
// peak for precision p, bytes at the bandwidth) over the seconds it took,
// so that the estimate with this efficiency gives back the measured time.
// 0 when there is nothing to divide.
func Achieved(d Device, c OpClass, p Precision, flops, bytes, seconds float64) float64 {
	peak := d.Peak(c, p)
	if c == ClassNone || peak <= 0 || d.Bandwidth <= 0 || !(seconds > 0) {
		return 0
	}
	return max(flops/peak, bytes/d.Bandwidth) / seconds
}

// Probe is one micro-benchmark a calibration runs: a row of the stack
// standing for a class of operation, with the roofline's work for it per
// sample over the forward and backward passes, and how many rows of the
// stack do the same work (the calibration weighs the probe's time by it).
type Probe struct {
	Class  OpClass
	Row    int     // index in Result.Rows
	Count  int     // rows with the same kind, shapes and settings
	FLOPs  float64 // per sample, forward and backward
	Elems  float64 // activation elements read and written per sample, both passes
	Params int64   // weights read (forward and backward) and gradient written
}

// ProbesPerClass bounds a class's micro-benchmarks.
const ProbesPerClass = 3

// probeKey is what makes two rows the same micro-benchmark.
type probeKey struct {
	class        OpClass
	kind         Kind
	in, out      Shape
	kernel       Pair
	stride       Pair
	groups       int64
	depthwise    bool
	noBias, grad bool
	norm         NormKind
}

// Probes returns the stack's micro-benchmarks in class order: for the
// convolutions (dense, pointwise, grouped), the dense layers and batch
// normalisation, the ProbesPerClass distinct layers that do the most work
// in the stack (a layer's work times the rows that repeat it), so that
// the measured efficiency is the one at the sizes the stack uses; for the
// element-wise class one pass of a ReLU-like function over the largest
// output.
func (r *Result) Probes() []Probe {
	var found []Probe
	index := map[probeKey]int{}
	memory := Probe{Class: ClassMemory, Row: -1, Count: 1}
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Status != StatusOK {
			continue
		}
		l := row.Layer
		w := rowWork(row)
		ok := false
		switch w.Class {
		case ClassConv, ClassGrouped, ClassMatrix, ClassPointwise:
			ok = l.Kind == KindConv || l.Kind == KindDense // the probes build these two only
		case ClassNorm:
			ok = l.Kind == KindNorm && l.Norm == NormBatch
		}
		if ok {
			k := probeKey{class: w.Class, kind: l.Kind, in: row.In, out: row.Out, kernel: l.Kernel,
				stride: l.EffectiveStride(), groups: l.Groups, depthwise: l.Depthwise, noBias: l.NoBias, grad: row.Grad, norm: l.Norm}
			if row.Unstrided {
				k.stride = Square(1)
			}
			if j, seen := index[k]; seen {
				found[j].Count++
			} else {
				index[k] = len(found)
				found = append(found, Probe{Class: w.Class, Row: i, Count: 1, FLOPs: w.FwdFLOPs + w.BwdFLOPs,
					Elems: w.FwdRead + w.FwdWrite + w.BwdRead + w.BwdWrite, Params: row.Params})
			}
		}
		if e := elems(row.Out); e > 0 && (memory.Row < 0 || e > memory.Elems/5) {
			// one FLOP per element each way; forward reads and writes
			// it, backward reads the gradient and the input and writes one
			memory = Probe{Class: ClassMemory, Row: i, Count: 1, FLOPs: 2 * e, Elems: 5 * e}
		}
	}
	weight := func(p Probe) float64 {
		if p.Class == ClassNorm {
			return float64(p.Count) * p.Elems
		}
		return float64(p.Count) * p.FLOPs
	}
	slices.SortStableFunc(found, func(a, b Probe) int {
		if a.Class != b.Class {
			return cmp.Compare(a.Class, b.Class)
		}
		return cmp.Compare(weight(b), weight(a))
	})
	var out []Probe
	per := [classCount]int{}
	for _, p := range found {
		if per[p.Class] < ProbesPerClass {
			per[p.Class]++
			out = append(out, p)
		}
	}
	if memory.Row >= 0 {
		out = append(out, memory)
	}
	slices.SortStableFunc(out, func(a, b Probe) int { return cmp.Compare(a.Class, b.Class) })
	return out
}

// ProbeBytes returns the bytes per activation element and per parameter
// (the forward's weight read and the backward's weight read and gradient
// write together) that the roofline counts at precision p, so that a
// probe moves n·act·Elems + weight·Params bytes at micro-batch n.
func ProbeBytes(p Precision) (act, weight float64) {
	wf, wb := weightBytes(p)
	return float64(ActivationBytes(p)), wf + wb
}
