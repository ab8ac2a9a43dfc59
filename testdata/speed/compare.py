#!/usr/bin/env python3
"""Times stackfit against PyTorch on the same question, in one run.

stackfit: `stackfit report testdata/published/resnet50.yaml --format json`,
timed twice: as a whole process (start-up included), and inside one
process with the Go benchmark BenchmarkReportResNet50 (load, evaluate,
memory, fit solver, print). The whole-process time is split into the
floor of any Go process here, stackfit's own start-up and the report's
work.
PyTorch: build torchvision's ResNet-50 and run a dummy 1×3×224×224 forward
pass with a hook on every layer recording its output shape — the usual way
to get the same per-layer numbers.

Run from the repository root with Debian's python3-torch and
python3-torchvision:
    go build -o /tmp/stackfit . && /usr/bin/python3 testdata/speed/compare.py /tmp/stackfit
"""
import re
import statistics
import subprocess
import sys
import time

import torch
import torchvision

BIN = sys.argv[1] if len(sys.argv) > 1 else "./stackfit"
STACK = "testdata/published/resnet50.yaml"


def time_processes(rounds=60):
    """Whole-process medians of three commands, run in turn so that the
    machine's drifting speed falls on all three alike: an empty Go program
    (the floor of any process here), `stackfit help` (start-up of the
    stackfit binary, its libraries' initialisation included, with no stack
    work) and the report itself."""
    hello = build_hello()
    cmds = {
        "hello": [hello],
        "help": [BIN, "help"],
        "report": [BIN, "report", STACK, "--format", "json"],
    }
    times = {k: [] for k in cmds}
    for _ in range(rounds):
        for k, cmd in cmds.items():
            t0 = time.perf_counter()
            subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
            times[k].append(time.perf_counter() - t0)
    return {k: statistics.median(v) for k, v in times.items()}


def time_pytorch(n=5):
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        net = torchvision.models.resnet50()
        shapes = []
        for m in net.modules():
            if not list(m.children()):
                m.register_forward_hook(lambda mod, i, o: shapes.append(tuple(o.shape)))
        params = sum(p.numel() for p in net.parameters())
        with torch.no_grad():
            net(torch.zeros(1, 3, 224, 224))
        times.append(time.perf_counter() - t0)
    assert params == 25557032, params
    return statistics.median(times)


def time_in_process():
    out = subprocess.run(["go", "test", "./ui/cli", "-run", "XXX", "-bench", "ReportResNet50", "-benchmem", "-count", "5"],
                         check=True, capture_output=True, text=True).stdout
    ns = [float(m) for m in re.findall(r"BenchmarkReportResNet50\S*\s+\d+\s+([\d.]+) ns/op", out)]
    return statistics.median(ns) / 1e9


def build_hello():
    """A Go program that does nothing: the floor of a whole-process time."""
    src = "package main\nfunc main() {}\n"
    subprocess.run(["mkdir", "-p", "/tmp/stackfit-hello"], check=True)
    open("/tmp/stackfit-hello/main.go", "w").write(src)
    open("/tmp/stackfit-hello/go.mod", "w").write("module hello\ngo 1.24\n")
    subprocess.run(["go", "build", "-o", "/tmp/stackfit-hello/hello", "."], cwd="/tmp/stackfit-hello", check=True)
    return "/tmp/stackfit-hello/hello"


if __name__ == "__main__":
    w = time_processes()
    i = time_in_process()
    p = time_pytorch()
    s = w["report"]
    print(f"PyTorch build + hooked forward (ResNet-50):    {p * 1000:9.2f} ms (median of 5)")
    print(f"stackfit report, whole process:                {s * 1000:9.2f} ms (median of 60) -> {p / s:6.0f}x")
    print(f"stackfit report, inside one process:           {i * 1000:9.3f} ms (Go benchmark)  -> {p / i:6.0f}x")
    print(f"  of the whole process: an empty Go program    {w['hello'] * 1000:9.2f} ms (the floor)")
    print(f"  stackfit start-up without work (help)        {w['help'] * 1000:9.2f} ms")
    print(f"  the report's own work, cold                  {(s - w['help']) * 1000:9.2f} ms")
