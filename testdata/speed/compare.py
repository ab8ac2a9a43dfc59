#!/usr/bin/env python3
"""Times stackfit against PyTorch on the same question, in one run.

stackfit: `stackfit report testdata/published/resnet50.yaml --format json`,
timed as a whole process (start-up included) for two builds of the same
source — the default `go build` (dynamically linked, because a terminal
library looks up the home directory through the C library when cgo is on)
and the static `CGO_ENABLED=0 go build` the README recommends for training
boxes — and inside one process with the Go benchmark
BenchmarkReportResNet50 (load, evaluate, memory, fit solver, print). Each
whole-process time is split into the floor of any Go process here, the
binary's own start-up (`stackfit help`: no stack work) and the report's
work.

PyTorch: build torchvision's ResNet-50 and run a dummy 1×3×224×224 forward
pass with a hook on every layer recording its output shape — the usual way
to get the same per-layer numbers.

Run from the repository root with Debian's python3-torch and
python3-torchvision:
    /usr/bin/python3 testdata/speed/compare.py
"""
import os
import re
import statistics
import subprocess
import tempfile
import time

import torch
import torchvision

STACK = "testdata/published/resnet50.yaml"


def build(tmp):
    """Builds the three programs timed: stackfit twice and an empty one."""
    bins = {"default": os.path.join(tmp, "stackfit"), "static": os.path.join(tmp, "stackfit-static")}
    subprocess.run(["go", "build", "-o", bins["default"], "."], check=True)
    subprocess.run(["go", "build", "-o", bins["static"], "."], check=True, env={**os.environ, "CGO_ENABLED": "0"})
    hello = os.path.join(tmp, "hello")
    os.makedirs(hello + "-src")
    with open(os.path.join(hello + "-src", "main.go"), "w") as f:
        f.write("package main\nfunc main() {}\n")
    with open(os.path.join(hello + "-src", "go.mod"), "w") as f:
        f.write("module hello\ngo 1.24\n")
    subprocess.run(["go", "build", "-o", hello, "."], cwd=hello + "-src", check=True)
    return bins, hello


def time_processes(bins, hello, rounds=60):
    """Whole-process medians, every command run once per round so that the
    machine's drifting speed falls on all of them alike."""
    cmds = {"hello": [hello]}
    for name, b in bins.items():
        cmds[name + " help"] = [b, "help"]
        cmds[name + " report"] = [b, "report", STACK, "--format", "json"]
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


if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        bins, hello = build(tmp)
        w = time_processes(bins, hello)
    i = time_in_process()
    p = time_pytorch()
    print(f"PyTorch build + hooked forward (ResNet-50):      {p * 1000:9.2f} ms (median of 5)")
    for name in ("static", "default"):
        s = w[name + " report"]
        print(f"stackfit report, whole process, {name + ' build:':15} {s * 1000:9.2f} ms (median of 60) -> {p / s:5.0f}x")
        print(f"    start-up alone (help) {w[name + ' help'] * 1000:.2f} ms, report work {(s - w[name + ' help']) * 1000:.2f} ms")
    print(f"stackfit report, inside one process:             {i * 1000:9.3f} ms (Go benchmark)  -> {p / i:5.0f}x")
    print(f"an empty Go program, whole process (the floor):  {w['hello'] * 1000:9.2f} ms")
