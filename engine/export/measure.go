package export

import (
	"fmt"
	"io"
	"strings"

	"stackfit/engine"
)

// writeEstimate writes the module's ESTIMATE table: what stackfit
// estimates for one training step on one GPU, as the measuring entry point
// needs it for any batch, precision and optimizer — per precision the
// activation bytes kept per sample and what the step's peak adds to them,
// per precision and optimizer the model states, and the workspace and
// overhead the stack's training section sets. Every figure is the
// engine's own; the module only multiplies by the batch and adds.
func writeEstimate(w io.Writer, an *engine.Analysis) {
	// The workspace and overhead as the engine took them (the training
	// section's, or the defaults): the workspace category less what the
	// step's peak adds at the analysed micro-batch.
	am := &an.Memory
	fmt.Fprintf(w, "\n\n# stackfit's estimate for one GPU (an estimate: keep headroom), for the measuring entry point.\n")
	fmt.Fprintf(w, "ESTIMATE = {\n")
	// The stack file's training settings, as the header names them: the
	// measuring entry point's defaults (its flags override them). The
	// batch is one GPU's micro-batch, what one process runs per step.
	t := an.Training
	fmt.Fprintf(w, "    \"batch\": %d,\n    \"precision\": %q,\n    \"optimizer\": %q,\n", am.MicroBatch, t.Precision.String(), t.Optimizer.String())
	fmt.Fprintf(w, "    \"workspace\": %d,\n    \"overhead\": %d,\n", am.Workspace-am.ScratchPerSample*am.MicroBatch, am.Overhead)
	// One Memory for every setting: its storage is reused, and Retarget
	// changes the optimizer without walking the rows again.
	var m engine.Memory
	perSample := make([]string, 0, len(engine.Precisions()))
	states := make([]string, 0, len(engine.Precisions()))
	for _, p := range engine.Precisions() {
		an.Result.Memory(engine.Training{Batch: 1, Precision: p}, an.Assumptions, &m)
		perSample = append(perSample, fmt.Sprintf("        %q: (%d, %d),  # kept for backward, added at the step's peak\n", p.String(), m.ActPerSample, m.ScratchPerSample))
		var parts []string
		for _, o := range engine.Optimizers() {
			m.Retarget(an.Result, engine.Training{Batch: 1, Precision: p, Optimizer: o})
			parts = append(parts, fmt.Sprintf("%q: (%d, %d, %d)", o.String(), m.Weights, m.Gradients, m.Optimizer))
		}
		states = append(states, fmt.Sprintf("        %q: {%s},\n", p.String(), strings.Join(parts, ", ")))
	}
	fmt.Fprintf(w, "    \"per_sample\": {\n%s    },\n    \"model_state\": {\n%s    },\n", strings.Join(perSample, ""), strings.Join(states, ""))
	writeProbes(w, an)
	fmt.Fprintf(w, "}\n")
}

// writeProbes writes the micro-benchmarks of the calibration (engine's
// Result.Probes): per probe the layer to build and the roofline's work per
// sample, and per precision the bytes per activation element and per
// parameter, so that the module prints each probe's FLOPs and bytes beside
// its measured time and stackfit calibrate divides (engine.Achieved). Then
// the step-time estimate for the file's settings, when it names a device.
func writeProbes(w io.Writer, an *engine.Analysis) {
	fmt.Fprintf(w, "    \"probes\": [\n")
	for _, p := range an.Result.Probes() {
		row := &an.Result.Rows[p.Row]
		l := row.Layer
		in, out := row.In, row.Out
		var op string
		switch {
		case p.Class == engine.ClassMemory:
			op = fmt.Sprintf("\"op\": \"relu\", \"shape\": [%d, %d, %d]", out.C, out.H, out.W)
		case l.Kind == engine.KindNorm:
			op = fmt.Sprintf("\"op\": \"batchnorm\", \"shape\": [%d, %d, %d]", in.C, in.H, in.W)
		case l.Kind == engine.KindDense:
			// MACs per sample = positions · in features · out features.
			pos := max(out.H*out.W, 1)
			inF := row.MACs / max(pos*out.C, 1)
			op = fmt.Sprintf("\"op\": \"dense\", \"positions\": %d, \"in\": %d, \"out\": %d, \"bias\": %s", pos, inF, out.C, pyBool(!l.NoBias))
		default:
			g := l.GroupsFor(in.C)
			before, _ := l.ResolvedPadding(in)
			s, d := l.EffectiveStride(), l.EffectiveDilation()
			if row.Unstrided {
				s = engine.Square(1)
			}
			op = fmt.Sprintf("\"op\": \"conv\", \"shape\": [%d, %d, %d], \"out\": %d, \"kernel\": [%d, %d], \"stride\": [%d, %d], \"pad\": [%d, %d], \"dilation\": [%d, %d], \"groups\": %d, \"bias\": %s",
				in.C, in.H, in.W, out.C, l.Kernel.H, l.Kernel.W, s.H, s.W, before.H, before.W, d.H, d.W, g, pyBool(!l.NoBias))
		}
		fmt.Fprintf(w, "        {\"class\": %q, %s, \"grad\": %s, \"flops\": %g, \"elems\": %g, \"params\": %d, \"count\": %d},\n",
			engine.ClassKey(p.Class), op, pyBool(row.Grad || p.Class == engine.ClassMemory), p.FLOPs, p.Elems, p.Params, p.Count)
	}
	fmt.Fprintf(w, "    ],\n    \"probe_bytes\": {")
	for i, p := range engine.Precisions() {
		act, wt := engine.ProbeBytes(p)
		if i > 0 {
			fmt.Fprintf(w, ", ")
		}
		fmt.Fprintf(w, "%q: (%g, %g)", p.String(), act, wt)
	}
	fmt.Fprintf(w, "},\n")
	if tm := an.Time; tm != nil && tm.Estimated {
		fmt.Fprintf(w, "    \"step\": {\"device\": %q, \"batch\": %d, \"precision\": %q, \"seconds\": %g},\n",
			tm.Device.Key, tm.MicroBatch, an.Training.Precision.String(), tm.Compute/float64(tm.Accumulate)+tm.Optimizer)
	} else {
		fmt.Fprintf(w, "    \"step\": None,\n")
	}
}

// pyBool writes a Python boolean.
func pyBool(b bool) string {
	if b {
		return "True"
	}
	return "False"
}

// measureTool is the module's measuring entry point, run as
//
//	python net.py --measure --batch 64 --precision bf16-mixed --optimizer adamw
//
// Without those flags it measures the stack file's training settings (one
// GPU's micro-batch, the precision and the optimizer ESTIMATE records).
//
// It trains a few steps on synthetic data (CUDA when present, the CPU
// otherwise) and prints, per category, stackfit's estimate beside the
// measured peak, then the workspace and overhead that make the estimate
// match, in a line `stackfit calibrate` reads. It then times a
// micro-benchmark per class of operation (ESTIMATE["probes"]: layers of
// the stack, forward and backward; least of 5 timings after 2 warm-ups,
// CUDA events on a GPU, wall time on the CPU) and prints, per probe, the
// roofline's FLOPs and bytes beside the seconds ("stackfit-probe:" lines,
// from which calibrate derives the efficiencies), and the least time of a
// few whole training steps beside stackfit's estimate ("stackfit-step:").
// --parts limits it to some of memory, probes and step.
const measureTool = `

def _estimate(batch, precision, optimizer):
    """stackfit's estimate, per category, for one GPU at this batch."""
    kept, added = ESTIMATE["per_sample"][precision]
    weights, grads, state = ESTIMATE["model_state"][precision][optimizer]
    return {
        "weights": weights, "gradients": grads, "optimizer": state,
        "activations": kept * batch,
        "workspace": ESTIMATE["workspace"] + added * batch,
        "overhead": ESTIMATE["overhead"],
    }


def _optimizer(name, params):
    if name == "sgd":
        return torch.optim.SGD(params, lr=1e-3)
    if name == "momentum":
        return torch.optim.SGD(params, lr=1e-3, momentum=0.9)
    if name == "adam":
        return torch.optim.Adam(params, lr=1e-3)
    if name == "adamw":
        return torch.optim.AdamW(params, lr=1e-3)
    if name == "adagrad":
        return torch.optim.Adagrad(params, lr=1e-3)
    return torch.optim.RMSprop(params, lr=1e-3)


def _mib(n):
    return "%.1f MiB" % (n / 2**20)


def measure(batch, precision, optimizer, steps=3, device=None):
    """Trains a few steps on synthetic data and returns the measured peak:
    on CUDA the allocator's peak (max_memory_allocated and
    max_memory_reserved) and what the process uses beyond it (the CUDA
    context, from mem_get_info); on the CPU the profiler's peak of live
    bytes over one step, plus the model states made before it."""
    device = device or ("cuda" if torch.cuda.is_available() else "cpu")
    if precision.endswith("-master"):
        raise SystemExit("precision %s: the master-copy scheme needs its own training loop; measure with --precision fp32, fp16-mixed, bf16-mixed or bf16" % precision)
    if device == "cpu" and _dtype_of(precision) == torch.float16:
        raise SystemExit("fp16 autocast needs CUDA; on the CPU measure bf16-mixed")
    model, opt, step = _trainer(batch, precision, optimizer, device, set_to_none=False)

    step()  # the first step makes the gradients and the optimizer state
    if device == "cuda":
        torch.cuda.synchronize()
        torch.cuda.reset_peak_memory_stats()
        for _ in range(steps):
            step()
        torch.cuda.synchronize()
        free, total = torch.cuda.mem_get_info()
        reserved = torch.cuda.max_memory_reserved()
        return {"device": torch.cuda.get_device_name(), "allocated": torch.cuda.max_memory_allocated(),
                "reserved": reserved, "beyond": max(total - free - torch.cuda.memory_reserved(), 0)}
    from torch.profiler import ProfilerActivity, profile
    before = sum(t.numel() * t.element_size() for t in model.parameters())
    before += sum(t.numel() * t.element_size() for t in model.buffers())
    before += sum(p.grad.numel() * p.grad.element_size() for p in model.parameters() if p.grad is not None)
    for state in opt.state.values():
        before += sum(v.numel() * v.element_size() for v in state.values() if torch.is_tensor(v))
    with profile(activities=[ProfilerActivity.CPU], profile_memory=True) as prof:
        step()
    events = sorted((e for e in prof.profiler.kineto_results.events() if e.name() == "[memory]"), key=lambda e: e.start_us())
    live = peak = 0
    for e in events:
        live += e.nbytes()
        peak = max(peak, live)
    return {"device": "cpu", "allocated": before + peak, "reserved": before + peak, "beyond": 0}


def _dtype_of(precision):
    return {"fp16-mixed": torch.float16, "bf16-mixed": torch.bfloat16}.get(precision)


def _once(fn, device):
    """The seconds one call of fn takes: CUDA events on a GPU, wall time
    on the CPU."""
    if device == "cuda":
        start, end = torch.cuda.Event(enable_timing=True), torch.cuda.Event(enable_timing=True)
        start.record()
        fn()
        end.record()
        end.synchronize()
        return start.elapsed_time(end) / 1e3
    import time
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def _timed(fn, device, warmup=2, repeats=5):
    """The least of several timings of fn after warm-up calls (both
    noisy; the least is the one least disturbed)."""
    for _ in range(warmup):
        fn()
    return min(_once(fn, device) for _ in range(repeats))


def _device_name(device):
    return (torch.cuda.get_device_name() if device == "cuda" else "cpu").replace(" ", "_")


def probes(batch, precision, device, rounds=7):
    """Times each micro-benchmark of ESTIMATE["probes"] (a layer of the
    stack per class of operation, forward and backward) and returns lines
    for stackfit calibrate: the roofline's FLOPs and bytes for the probe
    beside the measured seconds. The probes are timed in rounds, each
    probe once per round, and each keeps its least time: a slow spell of
    a shared machine then spreads over all of them instead of spoiling
    one."""
    dtype = _dtype_of(precision)
    runs = []
    for p in ESTIMATE["probes"]:
        if p["op"] == "conv":
            conv = nn.Conv2d  # the stack's layer, built alone
            m = conv(p["shape"][0], p["out"], tuple(p["kernel"]), stride=tuple(p["stride"]), padding=tuple(p["pad"]),
                     dilation=tuple(p["dilation"]), groups=p["groups"], bias=p["bias"])
            x = torch.randn(batch, *p["shape"])
        elif p["op"] == "dense":
            m = nn.Linear(p["in"], p["out"], bias=p["bias"])
            x = torch.randn(batch, p["positions"], p["in"])
        elif p["op"] == "batchnorm":
            m = nn.BatchNorm2d(p["shape"][0])
            x = torch.randn(batch, *p["shape"])
        else:
            m = nn.ReLU()
            x = torch.randn(batch, *p["shape"])
        m = m.to(device)
        x = x.to(device)
        if precision == "bf16":
            m, x = m.to(torch.bfloat16), x.to(torch.bfloat16)
        x.requires_grad_(p["grad"])

        # The output's gradient is made once: in a network it comes from
        # the layer above, so making and filling it is no part of the
        # layer's time.
        def run(m=m, x=x, gy=[]):
            m.zero_grad(set_to_none=True)
            x.grad = None
            if dtype is not None:
                with torch.autocast(device_type=device, dtype=dtype):
                    y = m(x)
            else:
                y = m(x)
            if not gy:
                gy.append(torch.ones_like(y))
            y.backward(gy[0])

        runs.append(run)
    best = [float("inf")] * len(runs)
    for r in range(2 + rounds):
        for i, run in enumerate(runs):
            seconds = _once(run, device)
            if r >= 2:  # the first two rounds warm up
                best[i] = min(best[i], seconds)
    lines = []
    for p, seconds in zip(ESTIMATE["probes"], best):
        act, weight = ESTIMATE["probe_bytes"][precision]
        flops, nbytes = batch * p["flops"], batch * act * p["elems"] + weight * p["params"]
        lines.append("stackfit-probe: device=%s class=%s precision=%s batch=%d flops=%.6g bytes=%.6g seconds=%.6g count=%d"
                     % (_device_name(device), p["class"], precision, batch, flops, nbytes, seconds, p["count"]))
    return lines


def step_time(batch, precision, optimizer, device, steps=5):
    """The least time of a few whole training steps (forward, backward and
    the optimizer step) on synthetic data, after a warm-up step."""
    _, _, step = _trainer(batch, precision, optimizer, device, set_to_none=True)
    return _timed(step, device, warmup=1, repeats=steps)


def _trainer(batch, precision, optimizer, device, set_to_none):
    """The model, its optimizer and one training step (forward, backward,
    optimizer) on synthetic data at this batch and precision."""
    model = MODEL().to(device).train()
    if precision == "bf16":
        model = model.to(torch.bfloat16)
    dtype = _dtype_of(precision)
    opt = _optimizer(optimizer, model.parameters())
    x = torch.randn(batch, *INPUT_SHAPE, device=device)
    if precision == "bf16":
        x = x.to(torch.bfloat16)

    def step():
        opt.zero_grad(set_to_none=set_to_none)
        if dtype is not None:
            with torch.autocast(device_type=device, dtype=dtype):
                out = model(x)
        else:
            out = model(x)
        out.float().sum().backward()
        opt.step()

    return model, opt, step


def main(argv=None):
    import argparse
    ap = argparse.ArgumentParser(description="Measure one GPU's training memory for this module and compare it with stackfit's estimate.")
    ap.add_argument("--measure", action="store_true", help="run a few training steps on synthetic data and report")
    ap.add_argument("--batch", type=int, default=ESTIMATE["batch"], help="samples per step on this GPU (default: the stack file's micro-batch, %(default)s)")
    ap.add_argument("--precision", default=ESTIMATE["precision"], choices=sorted(ESTIMATE["per_sample"]), help="default: the stack file's, %(default)s")
    ap.add_argument("--optimizer", default=ESTIMATE["optimizer"], choices=["sgd", "momentum", "adam", "adamw", "adagrad", "rmsprop"], help="default: the stack file's, %(default)s")
    ap.add_argument("--device", choices=["cuda", "cpu"], help="default: cuda when present")
    ap.add_argument("--parts", default="memory,probes,step", help="what to measure, comma-separated: memory (the peak), probes (a micro-benchmark per class of operation, for the efficiencies), step (whole training steps' time); default: all")
    args = ap.parse_args(argv)
    if not args.measure:
        ap.print_help()
        return
    parts = set(args.parts.split(","))
    if not parts or parts - {"memory", "probes", "step"}:
        raise SystemExit("--parts: give memory, probes and/or step, comma-separated")
    device = args.device or ("cuda" if torch.cuda.is_available() else "cpu")
    if args.precision.endswith("-master"):
        raise SystemExit("precision %s: the master-copy scheme needs its own training loop; measure with --precision fp32, fp16-mixed, bf16-mixed or bf16" % args.precision)
    if device == "cpu" and args.precision == "fp16-mixed":
        raise SystemExit("fp16 autocast needs CUDA; on the CPU measure bf16-mixed")
    if "memory" in parts:
        _report_memory(args, device)
    if "probes" in parts:
        print("stackfit probes: %s, batch %d, %s (least of 7 rounds after 2 warm-ups, forward and backward)" % (_device_name(device), args.batch, args.precision))
        for line in probes(args.batch, args.precision, device):
            print(line)
    if "step" in parts:
        seconds = step_time(args.batch, args.precision, args.optimizer, device)
        est = ESTIMATE["step"]
        if est and est["batch"] == args.batch and est["precision"] == args.precision:
            note = "stackfit's estimate %.4g s on %s (an estimate: it assumes the efficiencies hold and no overhead)" % (est["seconds"], est["device"])
        else:
            note = "no estimate at these settings (stackfit estimates the file's batch and precision when it names a gpu)"
        print("  %-12s %10.4g s measured (least of 5 after a warm-up) · %s" % ("step time", seconds, note))
        print("stackfit-step: device=%s batch=%d precision=%s optimizer=%s seconds=%.6g" % (_device_name(device), args.batch, args.precision, args.optimizer, seconds))


def _report_memory(args, device):
    est = _estimate(args.batch, args.precision, args.optimizer)
    got = measure(args.batch, args.precision, args.optimizer, device=device)
    print("stackfit measure: %s, batch %d, %s, %s" % (got["device"], args.batch, args.precision, args.optimizer))
    for name, value in est.items():
        print("  %-12s %12s  (estimate)" % (name, _mib(value)))
    allocator = sum(v for k, v in est.items() if k != "overhead")
    print("  %-12s %12s  estimate · %s measured peak (allocated) · %s reserved" % ("step", _mib(allocator), _mib(got["allocated"]), _mib(got["reserved"])))
    # The workspace that makes the allocator part match, and the overhead
    # measured beyond the allocator (CUDA only; the CPU has none).
    workspace = max(ESTIMATE["workspace"] + got["reserved"] - allocator, 0)
    overhead = got["beyond"] if got["device"] != "cpu" else ESTIMATE["overhead"]
    print("  set workspace %s and overhead %s to match (estimates differ by kernel and allocator; keep headroom)" % (_mib(workspace), _mib(overhead)))
    print("stackfit-calibration: device=%s workspace=%d overhead=%d" % (got["device"].replace(" ", "_"), workspace, overhead))


if __name__ == "__main__":
    main()
`
