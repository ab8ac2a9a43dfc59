package report

import (
	"fmt"
	"io"
	"math"
	"strings"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// TimeCaution states what the time figures assume, wherever they are shown.
const TimeCaution = "Estimates: a roofline model (Williams, Waterman & Patterson 2009) on the datasheet's peaks, " +
	"assuming kernels reach the efficiencies above, no stalls waiting for data, no launch or framework overhead, " +
	"and the gradient all-reduce overlapping the last backward pass; real steps are often slower — plan with at least 30% headroom."

// topLayers is how many of the slowest layers the text report names.
const topLayers = 5

// JSONTime is the training-time estimate (seconds; null without a device).
type JSONTime struct {
	Estimated        bool               `json:"estimated"`
	Device           string             `json:"device"`      // the --gpu name
	DeviceName       string             `json:"device_name"` // the product
	Source           string             `json:"source"`      // the datasheet its figures come from
	MicroBatch       int64              `json:"micro_batch"`
	Accumulate       int64              `json:"accumulate"`
	GPUs             int64              `json:"gpus"`
	Forward          float64            `json:"forward_s"`  // per micro-batch
	Backward         float64            `json:"backward_s"` // per micro-batch
	Optimizer        float64            `json:"optimizer_s"`
	AllReduce        float64            `json:"allreduce_s"`
	AllReduceExposed float64            `json:"allreduce_exposed_s"` // the part the backward pass does not hide
	Step             float64            `json:"step_s"`
	SamplesPerSecond float64            `json:"samples_per_s"`
	ComputeBound     float64            `json:"compute_bound_share"` // share of the compute time in compute-bound layers
	Dataset          int64              `json:"dataset"`             // 0: not given
	StepsPerEpoch    int64              `json:"steps_per_epoch"`
	Epoch            float64            `json:"epoch_s"`
	Efficiency       map[string]float64 `json:"efficiency"` // assumed share of peak per class of operation
	Top              []string           `json:"top"`        // paths of the slowest layers, slowest first
	Assumptions      string             `json:"assumptions"`
}

// JSONLayerTime is one layer's share of the time estimate, per micro-batch.
type JSONLayerTime struct {
	Class    string  `json:"class"`
	Forward  float64 `json:"forward_s"`
	Backward float64 `json:"backward_s"`
	FwdFLOPs float64 `json:"forward_flops"`
	BwdFLOPs float64 `json:"backward_flops"`
	FwdBytes float64 `json:"forward_bytes"`
	BwdBytes float64 `json:"backward_bytes"`
	Bound    string  `json:"bound"` // compute, memory or none
}

func buildTime(an *engine.Analysis) *JSONTime {
	tm := an.Time
	if tm == nil {
		return nil
	}
	j := &JSONTime{Estimated: tm.Estimated, Device: tm.Device.Key, DeviceName: tm.Device.Name, Source: tm.Device.Source,
		MicroBatch: tm.MicroBatch, Accumulate: tm.Accumulate, GPUs: tm.GPUs,
		Forward: tm.Forward, Backward: tm.Backward, Optimizer: tm.Optimizer, AllReduce: tm.AllReduce,
		AllReduceExposed: tm.Exposed, Step: tm.Step, SamplesPerSecond: tm.SamplesPerSecond,
		Dataset: tm.Dataset, StepsPerEpoch: tm.StepsPerEpoch, Epoch: tm.Epoch,
		Efficiency: map[string]float64{}, Top: []string{}, Assumptions: TimeCaution}
	if tm.Compute > 0 {
		j.ComputeBound = tm.ComputeBound / tm.Compute
	}
	for _, c := range engine.OpClasses() {
		j.Efficiency[c.String()] = tm.Efficiency[c]
	}
	for _, i := range tm.Top(topLayers) {
		j.Top = append(j.Top, an.Result.Rows[i].Path.String())
	}
	return j
}

func buildLayerTime(an *engine.Analysis, i int) *JSONLayerTime {
	if an.Time == nil || i >= len(an.Time.Layers) {
		return nil
	}
	l := an.Time.Layers[i]
	return &JSONLayerTime{Class: l.Class.String(), Forward: l.Forward, Backward: l.Backward,
		FwdFLOPs: l.FwdFLOPs, BwdFLOPs: l.BwdFLOPs, FwdBytes: l.FwdBytes, BwdBytes: l.BwdBytes, Bound: l.Bound.String()}
}

// writeTime writes the text report's time section: without a device, a
// line saying how to ask for one.
func writeTime(w io.Writer, an *engine.Analysis) {
	tm, t := an.Time, an.Training
	if tm == nil {
		fmt.Fprintf(w, "\ntraining time: give a GPU for an estimate, e.g. --gpu h100-sxm (one of %d datasheet devices; see stackfit help report)\n", len(engine.DeviceKeys()))
		return
	}
	d := tm.Device
	fmt.Fprintf(w, "\ntraining time per step — ESTIMATE · %s (%s) · batch %d on %d GPU%s (micro-batch %d", d.Key, textsafe.Line(d.Name),
		tm.Batch, tm.GPUs, plS(tm.GPUs), tm.MicroBatch)
	if tm.Accumulate > 1 {
		fmt.Fprintf(w, " × %d accumulation steps", tm.Accumulate)
	}
	fmt.Fprintf(w, ") · %s · %s\n", t.Precision, t.Optimizer)
	if !tm.Estimated {
		fmt.Fprintf(w, "  time not estimated: %s\n", an.Memory.Reason())
		return
	}
	tb := table{align: []byte("lrl")}
	tb.add("  forward", Seconds(tm.Forward), "per micro-batch")
	tb.add("  backward", Seconds(tm.Backward), "per micro-batch")
	tb.add("  optimizer", Seconds(tm.Optimizer), fmt.Sprintf("%s over the parameters", engine.FormatBytes(int64(tm.OptimizerBytes))))
	if tm.GPUs > 1 {
		tb.add("  all-reduce", Seconds(tm.AllReduce), fmt.Sprintf("ring over %s, %s of gradients; %s not hidden by the backward pass",
			d.LinkKind, engine.FormatBytes(int64(tm.AllReduceBytes)), Seconds(tm.Exposed)))
	}
	tb.add("  step", Seconds(tm.Step), fmt.Sprintf("%s samples/s", rate(tm.SamplesPerSecond)))
	if tm.Dataset > 0 {
		tb.add("  epoch", Seconds(tm.Epoch), fmt.Sprintf("%s samples in %s steps", engine.GroupDigits(tm.Dataset), engine.GroupDigits(tm.StepsPerEpoch)))
	}
	tb.write(w)
	if tm.Dataset == 0 {
		fmt.Fprintln(w, "  epoch: give --dataset N (training samples) for an epoch's time")
	}
	if tm.Compute > 0 {
		cb := tm.ComputeBound / tm.Compute
		fmt.Fprintf(w, "  bound by: compute %.0f%% of the layer time, memory %.0f%%\n", 100*cb, 100*(1-cb))
	}
	if top := tm.Top(topLayers); len(top) > 0 {
		fmt.Fprintln(w, "  slowest layers:")
		total := tm.Forward + tm.Backward
		for _, i := range top {
			row, l := &an.Result.Rows[i], tm.Layers[i]
			fmt.Fprintf(w, "    %-12s %-34s %9s %3.0f%%  %s-bound (%s)\n", row.Path, textsafe.Line(clipText(engine.RowSummary(row), 34)),
				Seconds(l.Forward+l.Backward), 100*(l.Forward+l.Backward)/total, l.Bound, l.Class)
		}
	}
	e := tm.Efficiency
	var shares []string
	for _, c := range engine.OpClasses() {
		shares = append(shares, fmt.Sprintf("%s %.0f%%", c, 100*e[c]))
	}
	fmt.Fprintf(w, "  efficiency assumed: %s of peak\n", strings.Join(shares, ", "))
	fmt.Fprintf(w, "  device: %s\n", d.Source)
	fmt.Fprintf(w, "  %s\n", TimeCaution)
}

// Seconds writes a duration in seconds with a unit that suits it.
func Seconds(s float64) string {
	switch {
	case math.IsNaN(s) || math.IsInf(s, 0):
		return "—"
	case s == 0:
		return "0 s"
	case s < 1e-3:
		return fmt.Sprintf("%.1f µs", s*1e6)
	case s < 1:
		return fmt.Sprintf("%.2f ms", s*1e3)
	case s < 120:
		return fmt.Sprintf("%.2f s", s)
	case s < 2*3600:
		return fmt.Sprintf("%.1f min", s/60)
	case s < 2*86400:
		return fmt.Sprintf("%.1f h", s/3600)
	}
	return fmt.Sprintf("%.1f days", s/86400)
}

// rate writes samples per second.
func rate(v float64) string {
	if v >= 100 {
		return engine.GroupDigits(int64(math.Round(v)))
	}
	return fmt.Sprintf("%.1f", v)
}

// clipText shortens s to n runes, marking the cut.
func clipText(s string, n int) string {
	r := []rune(s)
	if len(r) <= n {
		return s
	}
	return string(r[:n-1]) + "…"
}

// Rate writes samples per second as the time section does.
func Rate(v float64) string { return rate(v) }
