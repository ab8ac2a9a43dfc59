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
	fmt.Fprintf(w, "    \"per_sample\": {\n%s    },\n    \"model_state\": {\n%s    },\n}\n", strings.Join(perSample, ""), strings.Join(states, ""))
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
// match, in a line `stackfit calibrate` reads.
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
    model = MODEL().to(device).train()
    if precision == "bf16":
        model = model.to(torch.bfloat16)
    dtype = {"fp16-mixed": torch.float16, "bf16-mixed": torch.bfloat16}.get(precision)
    if device == "cpu" and dtype == torch.float16:
        raise SystemExit("fp16 autocast needs CUDA; on the CPU measure bf16-mixed")
    opt = _optimizer(optimizer, model.parameters())
    x = torch.randn(batch, *INPUT_SHAPE, device=device)
    if precision == "bf16":
        x = x.to(torch.bfloat16)

    def step():
        opt.zero_grad(set_to_none=False)
        if dtype is not None:
            with torch.autocast(device_type=device, dtype=dtype):
                out = model(x)
        else:
            out = model(x)
        out.float().sum().backward()
        opt.step()

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


def main(argv=None):
    import argparse
    ap = argparse.ArgumentParser(description="Measure one GPU's training memory for this module and compare it with stackfit's estimate.")
    ap.add_argument("--measure", action="store_true", help="run a few training steps on synthetic data and report")
    ap.add_argument("--batch", type=int, default=ESTIMATE["batch"], help="samples per step on this GPU (default: the stack file's micro-batch, %(default)s)")
    ap.add_argument("--precision", default=ESTIMATE["precision"], choices=sorted(ESTIMATE["per_sample"]), help="default: the stack file's, %(default)s")
    ap.add_argument("--optimizer", default=ESTIMATE["optimizer"], choices=["sgd", "momentum", "adam", "adamw", "adagrad", "rmsprop"], help="default: the stack file's, %(default)s")
    ap.add_argument("--device", choices=["cuda", "cpu"], help="default: cuda when present")
    args = ap.parse_args(argv)
    if not args.measure:
        ap.print_help()
        return
    est = _estimate(args.batch, args.precision, args.optimizer)
    got = measure(args.batch, args.precision, args.optimizer, device=args.device)
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
