package engine_test

import (
	"math"
	"testing"

	"stackfit/engine"
)

// TestDeviceDatasheets checks every device's figures against its vendor's
// datasheet, dense (the 2:4-sparse figures the datasheets print beside them
// are twice these). TF32 and BF16 are 0 where the GPU has no such tensor
// cores. Units: TFLOP/s, GB/s, GiB of memory, GB/s of link (both directions).
func TestDeviceDatasheets(t *testing.T) {
	type sheet struct {
		key                    string
		fp32, tf32, fp16, bf16 float64
		bw                     float64
		mem                    int64
		link                   float64
	}
	want := []sheet{
		// NVIDIA A100 Tensor Core GPU datasheet, A100 40GB SXM: FP32 19.5, TF32 156 (312 sparse), BF16/FP16 312 (624 sparse), 1,555 GB/s, NVLink 600 GB/s.
		{"a100-40gb", 19.5, 156, 312, 312, 1555, 40, 600},
		// Same datasheet, A100 80GB SXM: same throughput, HBM2e 2,039 GB/s.
		{"a100-80gb", 19.5, 156, 312, 312, 2039, 80, 600},
		// NVIDIA H100 Tensor Core GPU datasheet, H100 SXM: FP32 67, TF32 989 sparse, BF16/FP16 1,979 sparse, 3.35 TB/s, NVLink 900 GB/s.
		{"h100-sxm", 67, 494.5, 989.5, 989.5, 3350, 80, 900},
		// Same datasheet, H100 PCIe: FP32 51, TF32 756 sparse, BF16/FP16 1,513 sparse (756 dense, rounded), 2 TB/s, PCIe Gen5 128 GB/s.
		{"h100-pcie", 51, 378, 756, 756, 2000, 80, 128},
		// NVIDIA H200 Tensor Core GPU datasheet, H200 SXM: as H100 SXM, 141 GB HBM3e at 4.8 TB/s, NVLink 900 GB/s.
		{"h200", 67, 494.5, 989.5, 989.5, 4800, 141, 900},
		// NVIDIA L4 Tensor Core GPU datasheet: FP32 30.3, TF32 120 sparse, BF16/FP16 242 sparse (121 dense), 300 GB/s, PCIe Gen4 x16 64 GB/s (from memory).
		{"l4", 30.3, 60, 121, 121, 300, 24, 64},
		// NVIDIA L40S datasheet: FP32 91.6, TF32 366 sparse, BF16/FP16 733 sparse (362.05 dense), 864 GB/s, PCIe Gen4 x16 64 GB/s (from memory).
		{"l40s", 91.6, 183, 362.05, 362.05, 864, 48, 64},
		// NVIDIA A10 Tensor Core GPU datasheet: FP32 31.2, TF32 125 sparse, BF16/FP16 250 sparse, 600 GB/s, PCIe Gen4 64 GB/s (from memory).
		{"a10", 31.2, 62.5, 125, 125, 600, 24, 64},
		// NVIDIA T4 Tensor Core GPU datasheet: FP32 8.1, mixed-precision FP16/FP32 65, 320 GB/s, PCIe Gen3 x16 32 GB/s; no TF32 or BF16.
		{"t4", 8.1, 0, 65, 0, 320, 16, 32},
		// NVIDIA V100 Tensor Core GPU datasheet, V100 SXM2: FP32 15.7, tensor 125, 900 GB/s, NVLink 300 GB/s; no TF32 or BF16.
		{"v100", 15.7, 0, 125, 0, 900, 32, 300},
		// NVIDIA Ampere GA102 GPU Architecture whitepaper, GeForce RTX 3090: FP32 35.6, TF32 35.6, FP16 tensor with FP32 accumulate 71, 936 GB/s (from memory).
		{"rtx-3090", 35.6, 35.6, 71, 71, 936, 24, 64},
		// NVIDIA Ada GPU Architecture whitepaper, GeForce RTX 4090: FP32 82.6, TF32 82.6, FP16 tensor with FP32 accumulate 165.2, 1,008 GB/s (from memory).
		{"rtx-4090", 82.6, 82.6, 165.2, 165.2, 1008, 24, 64},
	}
	if got := len(engine.Devices()); got != len(want) {
		t.Errorf("%d devices, the test knows %d", got, len(want))
	}
	for _, w := range want {
		d, ok := engine.DeviceByKey(w.key)
		if !ok {
			t.Errorf("%s: not in the table", w.key)
			continue
		}
		near := func(name string, got, want float64) {
			if math.Abs(got-want) > 1e-9*math.Max(1, want) {
				t.Errorf("%s %s: %g, datasheet %g", w.key, name, got, want)
			}
		}
		near("fp32", d.FP32/1e12, w.fp32)
		near("tf32", d.TF32/1e12, w.tf32)
		near("fp16", d.FP16/1e12, w.fp16)
		near("bf16", d.BF16/1e12, w.bf16)
		near("bandwidth", d.Bandwidth/1e9, w.bw)
		near("link", d.Link/1e9, w.link)
		if d.Memory != w.mem<<30 {
			t.Errorf("%s memory %d, datasheet %d GB", w.key, d.Memory, w.mem)
		}
		if d.Source == "" || d.LinkKind == "" || d.Name == "" {
			t.Errorf("%s: source %q, link %q, name %q: every row names its datasheet", w.key, d.Source, d.LinkKind, d.Name)
		}
	}
}

// TestDeviceFromName checks the recognition of names nvidia-smi reports
// (the forms below are from memory of nvidia-smi's output).
func TestDeviceFromName(t *testing.T) {
	for name, want := range map[string]string{
		"NVIDIA A100-SXM4-40GB":   "a100-40gb",
		"NVIDIA A100-SXM4-80GB":   "a100-80gb",
		"NVIDIA A100 80GB PCIe":   "a100-80gb",
		"NVIDIA H100 80GB HBM3":   "h100-sxm",
		"NVIDIA H100 PCIe":        "h100-pcie",
		"NVIDIA H200":             "h200",
		"NVIDIA L4":               "l4",
		"NVIDIA L40S":             "l40s",
		"NVIDIA A10":              "a10",
		"Tesla T4":                "t4",
		"Tesla V100-SXM2-32GB":    "v100",
		"NVIDIA GeForce RTX 3090": "rtx-3090",
		"NVIDIA GeForce RTX 4090": "rtx-4090",
		"NVIDIA GeForce GTX 1080": "",
	} {
		d, ok := engine.DeviceFromName(name)
		if d.Key != want || ok != (want != "") {
			t.Errorf("%q: %q (%v), want %q", name, d.Key, ok, want)
		}
	}
}

// flat is a device with round peaks, for arithmetic by hand.
var flat = engine.Device{Key: "flat", FP32: 1e12, TF32: 1e12, FP16: 1e12, BF16: 1e12, Bandwidth: 1e11, Link: 2e10}

func ones() engine.Efficiency {
	var e engine.Efficiency
	for i := range e {
		e[i] = 1
	}
	return e
}

// TestRooflineByHand works a two-layer stack through the roofline formula
// (Williams, Waterman & Patterson 2009: time = max(FLOPs / peak, bytes /
// bandwidth)) with a MAC as 2 FLOPs and backward as the weight gradient
// plus, where the input needs one, the input gradient (common practice).
func TestRooflineByHand(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 32, W: 32}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 16, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}, NoBias: true},
		{Kind: engine.KindAct},
	}}
	r := engine.Evaluate(s)
	var tm engine.Time
	r.Time(engine.Training{Batch: 2, Precision: engine.FP32}, flat, ones(), &tm)
	if !tm.Estimated || len(tm.Layers) != 2 {
		t.Fatalf("not estimated: %+v", tm)
	}
	const n, in, out, params = 2.0, 3 * 32 * 32, 16 * 32 * 32, 16 * 3 * 9
	macs := float64(16 * 3 * 9 * 32 * 32) // filters · in-channels · kernel · positions
	// conv, fp32 (4 bytes an element and a weight): forward reads input and
	// weights, writes output; backward (the first layer's input needs no
	// gradient) only the weight gradient: reads the output's gradient and
	// the input, reads the weights, writes their gradient.
	fwdF, fwdB := n*2*macs, n*4*(in+out)+4*params
	bwdF, bwdB := n*2*macs, n*4*(out+in)+8*params
	conv := tm.Layers[0]
	roof := func(f, b float64) float64 { return math.Max(f/1e12, b/1e11) }
	if conv.FwdFLOPs != fwdF || conv.FwdBytes != fwdB || conv.BwdFLOPs != bwdF || conv.BwdBytes != bwdB {
		t.Errorf("conv: %+v; want fwd %g FLOPs %g bytes, bwd %g FLOPs %g bytes", conv, fwdF, fwdB, bwdF, bwdB)
	}
	if conv.Forward != roof(fwdF, fwdB) || conv.Backward != roof(bwdF, bwdB) {
		t.Errorf("conv times %g, %g; want %g, %g", conv.Forward, conv.Backward, roof(fwdF, fwdB), roof(bwdF, bwdB))
	}
	// the activation: 1 FLOP an element; its input needs a gradient (the
	// conv has weights), so backward reads the gradient and the input and
	// writes the input's gradient.
	act := tm.Layers[1]
	if act.FwdBytes != n*4*2*out || act.BwdBytes != n*4*3*out || act.FwdFLOPs != n*out {
		t.Errorf("act: %+v", act)
	}
	// SGD: read and write the weight, read the gradient (fp32).
	if tm.OptimizerBytes != params*12 || tm.Optimizer != params*12/1e11 {
		t.Errorf("optimizer %g bytes, %g s; want %d bytes", tm.OptimizerBytes, tm.Optimizer, params*12)
	}
	sum := conv.Forward + conv.Backward + act.Forward + act.Backward
	if math.Abs(tm.Step-sum-tm.Optimizer) > 1e-18 || tm.SamplesPerSecond != 2/tm.Step {
		t.Errorf("step %g, samples/s %g; want %g and 2/step", tm.Step, tm.SamplesPerSecond, sum+tm.Optimizer)
	}
	// efficiency divides: at 50% every time doubles.
	var half engine.Time
	e := ones()
	e[engine.ClassConv] = 0.5
	r.Time(engine.Training{Batch: 2, Precision: engine.FP32}, flat, e, &half)
	if half.Layers[0].Forward != 2*conv.Forward || half.Layers[1].Forward != act.Forward {
		t.Errorf("at 50%%: conv %g (want %g), act %g (want %g)", half.Layers[0].Forward, 2*conv.Forward, half.Layers[1].Forward, act.Forward)
	}
}

// TestRooflineBound: a wide 3×3 convolution at batch 64 in bf16 is far above
// an H100's ridge point (989.5 TFLOP/s ÷ 3.35 TB/s ≈ 295 FLOPs a byte) and is
// compute-bound; the ReLU after it, 1 FLOP per 4 bytes moved, memory-bound
// (the roofline paper's classification).
func TestRooflineBound(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 256, H: 56, W: 56}, Layers: []engine.Layer{
		{Kind: engine.KindConv, Filters: 256, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}},
		{Kind: engine.KindAct},
	}}
	d, _ := engine.DeviceByKey("h100-sxm")
	var tm engine.Time
	engine.Evaluate(s).Time(engine.Training{Batch: 64, Precision: engine.BF16Mixed}, d, engine.DefaultEfficiency(), &tm)
	if b := tm.Layers[0].Bound; b != engine.BoundCompute {
		t.Errorf("3×3 conv 256→256: %v-bound, want compute", b)
	}
	if b := tm.Layers[1].Bound; b != engine.BoundMemory {
		t.Errorf("relu: %v-bound, want memory", b)
	}
	if top := tm.Top(1); len(top) != 1 || top[0] != 0 {
		t.Errorf("slowest %v, want the conv (row 0)", top)
	}
}

// TestRingAllReduce checks the ring all-reduce's traffic: each GPU sends
// 2(n−1)/n of the data (Patarasuk & Yuan 2009's bandwidth-optimal
// all-reduce; common practice), nothing on one GPU; and that the step adds
// only the part the backward pass does not hide.
func TestRingAllReduce(t *testing.T) {
	if got, want := engine.RingAllReduce(1e9, 8, 1e10), 2*7.0/8*1e9/1e10; math.Abs(got-want) > 1e-15 {
		t.Errorf("8 GPUs: %g, want %g", got, want)
	}
	if got := engine.RingAllReduce(1e9, 1, 1e10); got != 0 {
		t.Errorf("1 GPU: %g, want 0", got)
	}
	s := &engine.Stack{Input: engine.Shape{C: 4096, H: 1, W: 1}, Layers: []engine.Layer{{Kind: engine.KindDense, Filters: 4096}}}
	r := engine.Evaluate(s)
	var tm engine.Time
	r.Time(engine.Training{Batch: 4, GPUs: 4, Precision: engine.FP32}, flat, ones(), &tm)
	grad := float64(r.Totals.Params) * 4
	if want := 2 * 3.0 / 4 * grad / (flat.Link / 2); math.Abs(tm.AllReduce-want) > 1e-12*want {
		t.Errorf("all-reduce %g s, want %g (gradient bytes over one direction of the link)", tm.AllReduce, want)
	}
	if want := math.Max(0, tm.AllReduce-tm.Backward); tm.Exposed != want || tm.Step != tm.Compute+tm.Optimizer+want {
		t.Errorf("exposed %g, step %g; want %g exposed", tm.Exposed, tm.Step, want)
	}
}

// TestGPUSetting: --gpu picks the device, any case, suggests a near miss,
// sets the budget to the device's memory unless one is given, and the
// dataset gives the epoch: ⌈dataset / batch⌉ steps.
func TestGPUSetting(t *testing.T) {
	gpu, _ := engine.SettingFor("gpu")
	var tr engine.Training
	if err := gpu.Parse(&tr, "L40S"); err != nil {
		t.Fatal(err)
	}
	if d, ok := tr.Device(); !ok || d.Key != "l40s" || tr.WithDevice().Budget != d.Memory {
		t.Errorf("l40s: %+v, budget %d", d, tr.WithDevice().Budget)
	}
	tr.Budget = 1 << 30
	if tr.WithDevice().Budget != 1<<30 {
		t.Error("a given budget was replaced by the device's memory")
	}
	if err := gpu.Parse(&tr, "h100sxm"); err == nil || !contains(err.Error(), `did you mean "h100-sxm"`) {
		t.Errorf("h100sxm: %v", err)
	}
	s := uniformStack(2)
	s.Training = engine.Training{Batch: 100, GPU: tr.GPU, Dataset: 1001}
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	if an.Time == nil || an.Time.StepsPerEpoch != 11 || an.Time.Epoch != 11*an.Time.Step || an.Time.Step <= 0 {
		t.Errorf("time %+v", an.Time)
	}
}

func contains(s, sub string) bool {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return true
		}
	}
	return false
}

// TestEfficiencySetting: the efficiency setting reads and writes classes
// and shares, refuses shares outside (0, 100%] and unknown classes, and
// the estimate takes a set class in place of its default. Source: the
// setting's syntax (FormatEfficiency) and the roofline: halving the
// efficiency of the only class at work doubles its time.
func TestEfficiencySetting(t *testing.T) {
	e, err := engine.ParseEfficiency("conv 42%, memory 0.061")
	if err != nil || engine.FormatEfficiency(e) != "conv 42%, memory 6.1%" {
		t.Errorf("parse: %v %q", err, engine.FormatEfficiency(e))
	}
	for _, bad := range []string{"conv 0%", "conv 101%", "cpu 5%", "conv", "conv x"} {
		if _, err := engine.ParseEfficiency(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
	tr := engine.Training{Efficiency: e}
	if got := tr.Efficiencies(); got[engine.ClassConv] != 0.42 || got[engine.ClassMatrix] != engine.DefaultEfficiency()[engine.ClassMatrix] {
		t.Errorf("efficiencies %v", got)
	}
	if got := engine.Achieved(engine.CPUDevice, engine.ClassConv, engine.FP32, 1e12, 0, 4); got != 0.25 {
		t.Errorf("1e12 FLOPs in 4 s at 1 TFLOP/s: %g, want 0.25", got)
	}
}
