#!/usr/bin/env python3
"""Measured memory of one training step, for stackfit's step-peak model.

Run with Debian's python3-torch (1.13, CPU only):

    /usr/bin/python3 testdata/memory/step_reference.py

It writes step_reference.json beside this script, and first the 40 random
stacks it measures as random/rNN.yaml (drawn from a fixed seed, so a rerun
writes the same files). The numbers are a CPU measurement: the Go test
compares stackfit's estimate to them, it does not treat them as a GPU's.

Stacks
------
- The published stack files in testdata/published/ named in PUBLISHED,
  at the input side given there: their files say 224×224; DenseNet-121
  runs at 160×160 and ConvNeXt-T at 128×128 so that the whole script
  stays within about six minutes on two cores (ConvNeXt's CPU kernels are
  the slowest here: about 100 s at 160×160). "input" in the JSON is the
  input used, "file_input" the file's.
- unet.yaml beside this script: a U-Net after Ronneberger et al. 2015,
  "U-Net: Convolutional Networks for Biomedical Image Segmentation"
  (MICCAI 2015), Fig. 1, with padded convolutions.
- 40 random small stacks (random_stack below), inputs 3×32×32 to 3×64×64.

Batches: 4 and 8 for the whole nets, 16 and 32 for the random stacks
(their per-sample terms are small beside the batch-independent ones).

Every stack runs through the Runner of testdata/reference/torch_reference.py
(imported, with sys.path set to that script's folder; nothing is copied from
it): the same layer builders (`build`), the same reading of blocks,
shortcuts, gates, forks and merges. The Runner builds each module as it
meets the layer, so a step run through it would allocate the weights inside
the measured window. StepModel therefore runs the Runner once outside the
window (batch 2, no grad) while recording every module it builds, and
hands the same modules back on later runs: torch_reference's module-level
`build` and the two constructors its residual shortcut calls
(`nn.Conv2d`, `nn.BatchNorm2d`) are wrapped for this process only (the
file is not changed); a replay checks that every request matches the
recorded one. The Runner keeps every named output in `taps` until the
forward pass ends; a model drops a map after its last use, so StepModel
gives the Runner a `taps` that keeps only the names some concat or add
reads.

Measurement (per stack, two batch sizes b1 < b2)
------------------------------------------------
A fresh model (built once per stack after torch.manual_seed(0), each
run on a deep copy of it), fp32 weights, train mode, its first step: no
gradient buffers exist before it (no zero_grad, no optimizer). The input
is made before the window, and the garbage collector is run before and
disabled during it. Inside
torch.profiler.profile(activities=[ProfilerActivity.CPU],
profile_memory=True, record_shapes=False) run: forward under
record_function("forward"), loss = out.float().sum(), backward under
record_function("backward") (PyTorch's profiler documentation,
torch.profiler.profile and its profile_memory argument, "track tensor
memory allocation/deallocation"; the profiler recipe's memory section,
pytorch.org/tutorials/recipes/recipes/profiler_recipe.html).

- Memory events: prof.profiler.kineto_results.events() entries named
  "[memory]" (exists in 1.13), nbytes() (negative for frees) and
  start_us(), sorted by start time (stable). The running sum of nbytes is
  the live bytes allocated inside the window; its maximum is the peak.
- Weights are NOT inside the window: they are allocated when the model is
  built, before profiling starts, and 1.13's CPU allocator reports only
  blocks it saw allocated while profiling (c10's ProfiledCPUMemoryReporter;
  a pre-window block's free is not reported either). The script checks it:
  no allocation in the window has a parameter's or buffer's address
  ("weights_in_window": 0). So the peak counts activations, autograd's
  saved tensors, gradients of activations, parameter gradients (created in
  backward) and CPU kernel temporaries; add the weights (param_bytes,
  buffer_bytes) for the process total.
- Phase of the peak: forward or backward from the two record_function
  ranges' events (start_us, duration_us); "loss" between them.
- End-of-forward live bytes: the running sum at the end of the forward
  range. End-of-step: the running sum after backward (parameter
  gradients, the output and the loss).
- Where the peak is: "peak_op" (outermost op > innermost op of the
  allocation that reached it) and "peak_place", [range, index of that
  outermost op among the range's ops, ops in the range].
- Per-sample figures are slopes, (x(b2) - x(b1)) / (b2 - b1). The
  batch-independent parts (parameter gradients, weight copies) cancel
  only where the peak is at the same place for both batches
  ("peak_same_place"); parameter gradients grow through backward while
  activations are released, so with a larger batch the peak can move
  earlier in backward, and then the slope is not a per-sample term: compare
  the batches' peak_bytes themselves.
- The peak is also found from the profiler's event tree,
  kineto_results.experimental_event_tree() (1.13), whose allocation
  events carry the block's address (extra_fields.ptr) and their parent op;
  both orderings must give the same peak ("tree_peak_matches").

CPU transients
--------------
CPU kernels allocate scratch a GPU kernel does not. In the events,
1.13's mkldnn_convolution allocates a block the size of its output, then
the result tensor, and frees the first before it returns; it also makes
blocks the size of the weight (reordered weights), and the backward of
ConvNeXt's depthwise 7×7 convolutions a block that grows with the channels
but not with the batch. From the event tree
each allocation is matched to its free by address; a block is transient
when some op that encloses its allocation (walking parent links up to, not
including, the forward/backward ranges) is still running when it is freed:
freed within the same op. Recorded per batch: the largest such block, the
op (outermost op > innermost enclosing op), its phase and lifetime, the
largest inside convolution ops, and the transient bytes live at the peak;
also the peak of the running sum without transient blocks
("peak_without_transients"), the part a GPU-side model compares to.
prof.key_averages() only gives per-op sums of allocations, not lifetimes,
so the tree walk is used.

Saved tensors (fp32 and bf16 autocast)
--------------------------------------
As torch_reference.py's saved_bytes: torch.autograd.graph.saved_tensors_hooks
records every tensor autograd keeps during a training-mode forward pass,
each storage once (by its address), without the profiler; per sample is
the slope between b1 and b2. fp32 for every stack; for the whole nets
(published and U-Net) also under torch.autocast("cpu",
dtype=torch.bfloat16). PyTorch 1.13's CPU autocast has no policy for
layer_norm and its kernel refuses a bf16 input with fp32 weights, so a
forward pre-hook casts the input of every LayerNorm and GroupNorm to fp32
first, which is CUDA autocast's fp32 policy for these ops (autocast
documentation, "CUDA Ops that can autocast to float32"); the cast copy is
then what the norm keeps, as on a GPU. CPU autocast's other op lists are
1.13's own.

The garbage collector: the saved-tensor runs leave reference cycles (a
pack hook that returns its tensor ties a saved output to its own graph);
were they collected inside a later window, 1.13's allocator could report
the free of a block allocated outside it under a stale size. So each
saved-tensor run is collected at once, and collection is off during a
window; "unmatched_free_bytes" (frees in the window with no allocation in
it) checks it.

Deterministic: fixed seeds; the random stacks are drawn by random.Random
and checked to run in PyTorch. Times in the JSON (peak_time_us,
lifetime_us, step_us) vary from run to run; byte counts do not.
"""
import copy
import gc
import json
import os
import random
import sys
import time

import torch
import torch.nn as nn
import yaml
from torch.profiler import ProfilerActivity, profile, record_function

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.normpath(os.path.join(HERE, "..", ".."))
sys.path.insert(0, os.path.normpath(os.path.join(HERE, "..", "reference")))
import torch_reference as tr  # noqa: E402  (the layer builders and the Runner)

THREADS = 2
WHOLE_BATCHES = (4, 8)
RANDOM_BATCHES = (16, 32)
RANDOM_COUNT = 40
RANDOM_SEED = 20261203
RANGES = ("forward", "backward")

# (file in testdata/published, input side used here)
PUBLISHED = [
    ("resnet50.yaml", 224),
    ("vgg16.yaml", 224),
    ("mobilenet-v2.yaml", 224),
    ("efficientnet-b0.yaml", 224),
    ("densenet121.yaml", 160),
    ("googlenet.yaml", 224),
    ("squeezenet1-1.yaml", 224),
    ("convnext-tiny.yaml", 128),
    ("mobilenet-v3-small.yaml", 224),
]


# ---- replaying the Runner's modules ---------------------------------------

class Recording:
    """The modules one model's Runner built, in the order it asked for them."""

    def __init__(self):
        self.made = []
        self.replay = False
        self.next = 0
        self.depth = 0


ACTIVE = [None]  # the Recording in use while a StepModel runs


def recorded(factory):
    """Wraps a module factory: records what it builds on the first run,
    hands the same module back on replays. Modules built inside another
    factory call (a Dense's nn.Linear) belong to the outer module."""

    def make(*args, **kwargs):
        rec = ACTIVE[0]
        if rec is None or rec.depth:
            return factory(*args, **kwargs)
        key = (getattr(factory, "__name__", repr(factory)), repr(args), repr(kwargs))
        if rec.replay:
            if rec.next >= len(rec.made) or rec.made[rec.next][0] != key:
                raise RuntimeError(f"replay asked for {key}, recorded "
                                   f"{rec.made[rec.next][0] if rec.next < len(rec.made) else 'nothing'}")
            m = rec.made[rec.next][1]
            rec.next += 1
            return m
        rec.depth += 1
        try:
            m = factory(*args, **kwargs)
        finally:
            rec.depth -= 1
        rec.made.append((key, m))
        return m

    return make


class RecordingNN:
    """torch.nn as torch_reference sees it here: the two constructors its
    Runner calls directly (the residual shortcut) are recorded."""

    Conv2d = staticmethod(recorded(nn.Conv2d))
    BatchNorm2d = staticmethod(recorded(nn.BatchNorm2d))

    def __getattr__(self, name):
        return getattr(nn, name)


tr.build = recorded(tr.build)
tr.nn = RecordingNN()


def merge_names(layers, out=None):
    """Names that some concat or add in the stack reads."""
    out = set() if out is None else out
    for layer in layers:
        if not isinstance(layer, dict):
            continue
        for key in ("concat", "add"):
            if key in layer:
                out.add(layer[key])
        for sub in layer.get("layers") or []:
            merge_names([sub], out)
        for br in layer.get("branches") or []:
            merge_names(tr.branch_layers(br), out)
    return out


class Taps(dict):
    """The Runner's named outputs, keeping only the names a merge reads."""

    def __init__(self, keep):
        super().__init__()
        self.keep = keep

    def __setitem__(self, name, value):
        if name in self.keep:
            super().__setitem__(name, value)


class StepModel(nn.Module):
    """A stack as one module: torch_reference's Runner over modules built
    once (see the module docstring)."""

    def __init__(self, layers, inp):
        super().__init__()
        self.layers = layers
        self.keep = merge_names(layers)
        self.rec = Recording()
        ACTIVE[0] = self.rec
        try:
            with torch.no_grad():
                tr.Runner(train=True).stack(layers, torch.zeros(2, *inp))
        finally:
            ACTIVE[0] = None
        self.mods = nn.ModuleList([m for _, m in self.rec.made])
        self.train()

    def forward(self, x):
        self.rec.replay, self.rec.next = True, 0
        ACTIVE[0] = self.rec
        try:
            r = tr.Runner(train=True)
            r.taps = Taps(self.keep)
            y = r.stack(self.layers, x)
        finally:
            ACTIVE[0] = None
        if self.rec.next != len(self.rec.made):
            raise RuntimeError(f"replay used {self.rec.next} of {len(self.rec.made)} modules")
        return y


def new_model(stack):
    """The stack's model before any step. Each run takes a deep copy of
    it, so the recording pass runs once per stack."""
    torch.manual_seed(0)
    return StepModel(stack["layers"], stack["input"])


def new_input(stack, batch):
    return torch.randn(batch, *stack["input"], generator=torch.Generator().manual_seed(1))


# ---- one profiled step -----------------------------------------------------

def tree_nodes(roots):
    stack = list(reversed(roots))
    while stack:
        e = stack.pop()
        yield e
        stack.extend(reversed(e.children))


def is_alloc(e):
    return type(e.extra_fields).__name__ == "_ExtraFields_Allocation"


def phase_of(t, ranges):
    for name in RANGES:
        lo, hi = ranges[name]
        if lo <= t <= hi:
            return name
    if ranges["forward"][1] < t < ranges["backward"][0]:
        return "loss"
    return "before" if t < ranges["forward"][0] else "after"


def op_chain(node):
    """'outermost op > innermost op' for an event's parent chain, below the
    forward/backward ranges."""
    inner = node
    while inner is not None and is_alloc(inner):
        inner = inner.parent
    if inner is None or inner.name in RANGES:
        return "(no op)"
    top = inner
    while top.parent is not None and top.parent.name not in RANGES:
        top = top.parent
    return top.name if top.id == inner.id else f"{top.name} > {inner.name}"


def op_place(node):
    """Where an event sits: its range and the index of its outermost op
    among that range's ops, as [range, index, ops in the range]."""
    top = node
    while top.parent is not None and top.parent.name not in RANGES:
        top = top.parent
    root = top.parent
    if root is None:
        return ["(none)", 0, 0]
    ops = [c for c in root.children if not is_alloc(c)]
    idx = next((i for i, c in enumerate(ops) if c.id == top.id), -1)
    return [root.name, idx, len(ops)]


def transient_op(alloc, free_ns):
    """The innermost op enclosing the allocation that is still running at
    free_ns, or None (the block outlives every op that made it)."""
    node = alloc.parent
    while node is not None and node.name not in RANGES:
        if node.start_time_ns <= free_ns <= node.end_time_ns:
            return node
        node = node.parent
    return None


def is_conv(chain):
    c = chain.lower()
    return "conv" in c or "mkldnn" in c


def step(base, stack, batch):
    model = copy.deepcopy(base)
    weights = {t.data_ptr() for t in list(model.parameters()) + list(model.buffers())}
    x = new_input(stack, batch)
    # Blocks freed by the garbage collector inside the window would be
    # frees of blocks allocated outside it (see "unmatched_free_bytes").
    gc.collect()
    gc.disable()
    try:
        with profile(activities=[ProfilerActivity.CPU], profile_memory=True, record_shapes=False) as prof:
            with record_function("forward"):
                out = model(x)
            loss = out.float().sum()
            with record_function("backward"):
                loss.backward()
    finally:
        gc.enable()
    grads = sum(p.grad.numel() * p.grad.element_size() for p in model.parameters() if p.grad is not None)
    kr = prof.profiler.kineto_results

    # The running sum over the memory events (see the module docstring).
    events = kr.events()
    ranges = {}
    for e in events:
        if e.name() in RANGES:
            ranges[e.name()] = (e.start_us(), e.start_us() + e.duration_us())
    mem = sorted(((e.start_us(), e.nbytes()) for e in events if e.name() == "[memory]"), key=lambda p: p[0])
    live = peak = 0
    peak_us = None
    end_forward = 0
    for t, n in mem:
        live += n
        if live > peak:
            peak, peak_us = live, t
        if t <= ranges["forward"][1]:
            end_forward = live
    end_step = live

    # The event tree: addresses, parents, transients.
    allocs = [e for e in tree_nodes(kr.experimental_event_tree()) if is_alloc(e)]
    allocs.sort(key=lambda e: e.start_time_ns)  # stable: ties keep tree order
    open_at, pairs, unmatched_free = {}, [], 0
    for i, e in enumerate(allocs):
        f = e.extra_fields
        if f.alloc_size > 0:
            open_at[f.ptr] = i
        else:
            j = open_at.pop(f.ptr, None)
            if j is None:
                unmatched_free += -f.alloc_size
            else:
                pairs.append((j, i))
    in_window = sum(1 for e in allocs if e.extra_fields.alloc_size > 0 and e.extra_fields.ptr in weights)
    transient = set()
    trans = []
    for j, i in pairs:
        a, f = allocs[j], allocs[i]
        op = transient_op(a, f.start_time_ns)
        if op is None:
            continue
        transient.update((j, i))
        trans.append({
            "bytes": a.extra_fields.alloc_size,
            "op": op_chain(op),
            "phase": phase_of(a.start_time_ns / 1000, ranges),
            "lifetime_us": round((f.start_time_ns - a.start_time_ns) / 1000, 1),
            "span": (j, i),
        })
    live = tpeak = tpeak_i = 0
    live_nt = peak_nt = 0
    for i, e in enumerate(allocs):
        n = e.extra_fields.alloc_size
        live += n
        if live > tpeak:
            tpeak, tpeak_i = live, i
        if i not in transient:
            live_nt += n
            peak_nt = max(peak_nt, live_nt)
    at_peak = sum(t["bytes"] for t in trans if t["span"][0] <= tpeak_i < t["span"][1])
    largest = max(trans, key=lambda t: t["bytes"], default=None)
    conv = [t for t in trans if is_conv(t["op"])]
    largest_conv = max(conv, key=lambda t: t["bytes"], default=None)
    by_phase = {}
    for p in RANGES:
        ts = [t for t in trans if t["phase"] == p]
        by_phase[p] = max((t["bytes"] for t in ts), default=0)
    for t in (largest, largest_conv):
        if t is not None:
            t.pop("span", None)
    del out, loss
    return {
        "peak": peak,
        "peak_us": peak_us - ranges["forward"][0],
        "peak_phase": phase_of(peak_us, ranges),
        "peak_op": op_chain(allocs[tpeak_i]),
        "peak_place": op_place(allocs[tpeak_i]),
        "end_forward": end_forward,
        "end_step": end_step,
        "grads": grads,
        "tree_peak": tpeak,
        "peak_without_transients": peak_nt,
        "transient_at_peak": at_peak,
        "largest": largest,
        "largest_conv": largest_conv,
        "largest_by_phase": by_phase,
        "weights_in_window": in_window,
        "unmatched_free": unmatched_free,
        "forward_us": ranges["forward"][1] - ranges["forward"][0],
        "backward_us": ranges["backward"][1] - ranges["backward"][0],
    }


# ---- saved tensors ---------------------------------------------------------

def fp32_norm_input(module, args):
    """CUDA autocast's fp32 policy for layer and group norm (see the docstring)."""
    if torch.is_autocast_cpu_enabled():
        return (args[0].float(),) + tuple(args[1:])
    return None


def saved_bytes(base, stack, batch, bf16):
    model = copy.deepcopy(base)
    if bf16:
        for m in model.modules():
            if isinstance(m, (nn.LayerNorm, nn.GroupNorm)):
                m.register_forward_pre_hook(fp32_norm_input)
    x = new_input(stack, batch)
    kept = {}

    def pack(t):
        st = t.storage()
        kept[st.data_ptr()] = st.nbytes()
        return t

    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        with torch.autocast("cpu", dtype=torch.bfloat16, enabled=bf16):
            model(x)
    # A pack hook that returns its tensor ties saved outputs into
    # reference cycles; free them now, not inside a later window.
    del model
    gc.collect()
    return sum(kept.values())


# ---- random stacks ---------------------------------------------------------

ACTS = ["relu", "relu", "relu", "silu", "gelu", "leaky-relu", "relu6", "hard-swish", "tanh"]


def r_act(rng):
    a = rng.choice(ACTS)
    if a == "leaky-relu" and rng.random() < 0.5:
        return {"act": a, "slope": 0.1}
    return {"act": a}


def r_norm(rng, c):
    r = rng.random()
    if r < 0.6:
        return {"norm": "batch"}
    if r < 0.75:
        return {"norm": "group", "groups": rng.choice([g for g in (2, 4, 8) if c % g == 0] or [1])}
    if r < 0.85:
        return {"norm": "layer"}
    return None


def conv_unit(rng, c, k, s, name=None):
    """A convolution (padded by half the kernel), perhaps a norm, an activation."""
    n = r_norm(rng, c)
    layers = [tr.conv(c, k, s, k // 2, n is None)]
    if n:
        layers.append(n)
    act = r_act(rng)
    if name:
        act = dict(act, name=name)
    layers.append(act)
    return layers


def basic_body(rng, c, s):
    body = [tr.conv(c, 3, s, 1), {"norm": "batch"}, r_act(rng), tr.conv(c, 3, 1, 1), {"norm": "batch"}]
    if rng.random() < 0.25:
        body.append(tr.se_rel("/4"))
    return body


def inverted_body(rng, cin, cout, s):
    t = cin * rng.choice([2, 4])
    return [tr.conv(t, 1), {"norm": "batch"}, {"act": "relu6"},
            dict(tr.conv(t, 3, s, 1), groups="depthwise"), {"norm": "batch"}, {"act": "relu6"},
            tr.conv(cout, 1), {"norm": "batch"}]


def random_stack(rng, i):
    """A small stack: a stem, two to four stages (plain convolutions,
    residual blocks with projections where the shape changes, inverted
    residuals, pooling, a dense-style concatenation), a dense head."""
    side = rng.choice([32, 40, 48, 56, 64])
    inp = [3, side, side] if rng.random() < 0.8 else [3, side, rng.choice([32, 48, 64])]
    c = rng.choice([8, 12, 16, 24, 32])
    downs_left = min(inp[1], inp[2]).bit_length() - 3  # keep the map at 2×2 or more (about)
    layers = conv_unit(rng, c, rng.choice([3, 5]), rng.choice([1, 1, 2]))
    if layers[0].get("stride", 1) == 2:
        downs_left -= 1
    names = 0
    for _ in range(rng.randint(2, 4)):
        s = 2 if downs_left > 0 and rng.random() < 0.6 else 1
        cout = min(64, c * 2) if s == 2 else c
        r = rng.random()
        if r < 0.25:
            for j in range(rng.randint(1, 2)):
                layers += conv_unit(rng, cout, 3, s if j == 0 else 1)
        elif r < 0.55:
            d = {"block": rng.randint(1, 3), "residual": True, "after": "relu", "layers": basic_body(rng, cout, s)}
            if rng.random() < 0.3:
                d["drop-path"] = 0.1
            layers.append(d)
        elif r < 0.7:
            layers.append({"block": rng.randint(1, 3), "residual": True, "shortcut": "identity",
                           "layers": inverted_body(rng, c, cout, s)})
        elif r < 0.85:
            if s == 2:
                layers.append(rng.choice([{"pool": "max", "kernel": 2}, {"pool": "avg", "kernel": 2},
                                          {"pool": "max", "kernel": 3, "stride": 2, "pad": 1}]))
            layers += conv_unit(rng, cout, rng.choice([1, 3]), 1)
        else:
            names += 1
            name = f"skip{names}"
            if s == 2:
                layers.append({"pool": "max", "kernel": 2})
            layers += conv_unit(rng, cout, 3, 1, name)
            layers += conv_unit(rng, cout, 3, 1)
            layers.append({"concat": name})
            layers += conv_unit(rng, cout, 1, 1)
        if rng.random() < 0.15:
            layers.append({"dropout": 0.1})
        downs_left -= s == 2
        c = cout
    if rng.random() < 0.25:
        layers += [{"pool-to": 2}, "flatten"]
    else:
        layers.append({"global-pool": rng.choice(["avg", "avg", "max"])})
    if rng.random() < 0.5:
        layers += [{"dense": rng.choice([32, 64])}, r_act(rng)]
        if rng.random() < 0.5:
            layers.append({"dropout": 0.2})
    layers.append({"dense": rng.choice([2, 5, 10])})
    return {"stackfit": 1, "name": f"random r{i:02d}", "input": inp, "layers": layers}


def runs(stack):
    try:
        with torch.no_grad():
            StepModel(stack["layers"], stack["input"])(new_input(stack, 2))
        return True
    except Exception:
        return False


def random_stacks():
    """Draws RANDOM_COUNT stacks that run in PyTorch and writes them as
    random/rNN.yaml."""
    rng = random.Random(RANDOM_SEED)
    folder = os.path.join(HERE, "random")
    os.makedirs(folder, exist_ok=True)
    out = []
    i = 0
    while len(out) < RANDOM_COUNT:
        stack = random_stack(rng, len(out) + 1)
        i += 1
        if i > 10 * RANDOM_COUNT:
            sys.exit("random stacks keep failing to run")
        if not runs(stack):
            continue
        path = os.path.join(folder, f"r{len(out) + 1:02d}.yaml")
        with open(path, "w") as f:
            f.write(f"# A random small stack for step_reference.py (seed {RANDOM_SEED}, stack {len(out) + 1}).\n"
                    "# Written by testdata/memory/step_reference.py; regenerate, never hand-edit.\n")
            yaml.safe_dump(stack, f, sort_keys=False, default_flow_style=None, allow_unicode=True, width=200)
        out.append((os.path.relpath(path, ROOT), stack))
    return out


# ---- the document ----------------------------------------------------------

def load(path):
    with open(path) as f:
        return yaml.load(f, Loader=tr.StackLoader)


def slope(a, b, b1, b2):
    d = b - a
    return d // (b2 - b1) if d % (b2 - b1) == 0 else d / (b2 - b1)


def measure(file, group, stack, file_input, batches, bf16):
    t0 = time.time()
    b1, b2 = batches
    base = new_model(stack)
    r = [step(base, stack, b) for b in batches]
    entry = {
        "file": file,
        "name": stack["name"],
        "group": group,
        "input": stack["input"],
        "file_input": file_input,
        "batches": list(batches),
        "param_bytes": sum(p.numel() * p.element_size() for p in base.parameters()),
        "buffer_bytes": sum(b.numel() * b.element_size() for b in base.buffers()),
        "peak_bytes": [x["peak"] for x in r],
        "peak_phase": [x["peak_phase"] for x in r],
        "peak_op": [x["peak_op"] for x in r],
        "peak_time_us": [x["peak_us"] for x in r],
        "peak_place": [x["peak_place"] for x in r],
        "peak_same_place": r[0]["peak_place"] == r[1]["peak_place"],
        "end_forward_bytes": [x["end_forward"] for x in r],
        "end_step_bytes": [x["end_step"] for x in r],
        "grad_bytes": [x["grads"] for x in r],
        "peak_per_sample": slope(r[0]["peak"], r[1]["peak"], b1, b2),
        "end_forward_per_sample": slope(r[0]["end_forward"], r[1]["end_forward"], b1, b2),
        "peak_without_transients_bytes": [x["peak_without_transients"] for x in r],
        "peak_without_transients_per_sample": slope(r[0]["peak_without_transients"], r[1]["peak_without_transients"], b1, b2),
        "transient": {
            "largest_bytes": [x["largest"]["bytes"] if x["largest"] else 0 for x in r],
            "largest": [x["largest"] for x in r],
            "largest_conv_bytes": [x["largest_conv"]["bytes"] if x["largest_conv"] else 0 for x in r],
            "largest_forward_bytes": [x["largest_by_phase"]["forward"] for x in r],
            "largest_backward_bytes": [x["largest_by_phase"]["backward"] for x in r],
            "at_peak_bytes": [x["transient_at_peak"] for x in r],
        },
        "checks": {
            "weights_in_window": sum(x["weights_in_window"] for x in r),
            "unmatched_free_bytes": [x["unmatched_free"] for x in r],
            "tree_peak_matches": all(x["tree_peak"] == x["peak"] for x in r),
        },
        "step_us": [x["forward_us"] + x["backward_us"] for x in r],
    }
    entry["transient"]["largest_per_sample"] = slope(entry["transient"]["largest_bytes"][0], entry["transient"]["largest_bytes"][1], b1, b2)
    s32 = [saved_bytes(base, stack, b, False) for b in batches]
    entry["saved_bytes_fp32"] = s32
    entry["saved_per_sample_fp32"] = slope(s32[0], s32[1], b1, b2)
    if bf16:
        s16 = [saved_bytes(base, stack, b, True) for b in batches]
        entry["saved_bytes_bf16"] = s16
        entry["saved_per_sample_bf16"] = slope(s16[0], s16[1], b1, b2)
    print(f"{time.time() - t0:6.1f}s  {file} at {stack['input']}: peak/sample {entry['peak_per_sample']} "
          f"({'/'.join(entry['peak_phase'])}), end-fwd/sample {entry['end_forward_per_sample']}, "
          f"saved fp32 {entry['saved_per_sample_fp32']}"
          + (f", bf16 {entry['saved_per_sample_bf16']}" if bf16 else ""), file=sys.stderr, flush=True)
    return entry


def main():
    torch.set_num_threads(THREADS)
    started = time.time()
    todo = []
    for file, side in PUBLISHED:
        rel = os.path.join("testdata", "published", file)
        doc = load(os.path.join(ROOT, rel))
        stack = {"stackfit": 1, "name": doc["name"], "input": [doc["input"][0], side, side], "layers": doc["layers"]}
        todo.append((rel, "published", stack, doc["input"], WHOLE_BATCHES, True))
    rel = os.path.join("testdata", "memory", "unet.yaml")
    doc = load(os.path.join(ROOT, rel))
    todo.append((rel, "unet", {"stackfit": 1, "name": doc["name"], "input": doc["input"], "layers": doc["layers"]},
                 doc["input"], WHOLE_BATCHES, True))
    for rel, stack in random_stacks():
        todo.append((rel, "random", stack, stack["input"], RANDOM_BATCHES, False))
    stacks = [measure(*t) for t in todo]
    doc = {
        "about": "Measured memory of one training step (forward, loss, backward) of a fresh fp32 model on the CPU, "
                 "torch.profiler with profile_memory; weights are outside the window. Regenerate with "
                 "/usr/bin/python3 testdata/memory/step_reference.py; never hand-edit.",
        "torch": torch.__version__,
        "threads": torch.get_num_threads(),
        "random_seed": RANDOM_SEED,
        "stacks": stacks,
    }
    with open(os.path.join(HERE, "step_reference.json"), "w") as f:
        json.dump(doc, f, indent=1, ensure_ascii=False)
        f.write("\n")
    print(f"{len(stacks)} stacks in {time.time() - started:.0f}s", file=sys.stderr)


if __name__ == "__main__":
    main()
