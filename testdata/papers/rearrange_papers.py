#!/usr/bin/env python3
"""Reference networks for stackfit's to-space, to-channels and keep, built
in PyTorch from their papers, for engine/export/paper_shuffle_test.go.

Reads one JSON job per line on standard input ({"name", "model", "input",
"export", "onnx_dir"}) and prints one JSON line per job with the
reference's trainable parameters and buffer elements, the bytes autograd
keeps per sample in fp32 (saved_tensors_hooks, each storage once, batch 4
minus batch 2 halved, so weights cancel: the method of
testdata/reference/torch_reference.py), the output shape of every step of
its forward pass in order (each convolution, norm, activation,
concatenation, slice, shuffle and residual addition), the largest
difference between its output and the exported module's given the same
state, and the ONNX files it wrote at opsets 13 and 17 (training mode with
the batch norms kept, no constant folding).

Exits with status 3 when PyTorch cannot be imported.
"""
import importlib.util
import json
import math
import sys
import traceback
import warnings

try:
    import torch
    import torch.nn as nn
except ImportError:
    sys.exit(3)

warnings.filterwarnings("ignore")


class Tape:
    """Records the output shape of every step a reference's forward runs."""

    def __init__(self):
        self.rows = None

    def __call__(self, op, y):
        if self.rows is not None:
            self.rows.append({"op": op, "out": list(y.shape[1:])})
        return y


class Upsampler(nn.Module):
    """Shi et al. 2016, section 3.2: (f1, n1) = (5, 64), (f2, n2) = (3, 32),
    f3 = 3 to r²·C channels, tanh after the first two layers, all at the low
    resolution, then the periodic shuffle (nn.PixelShuffle) to r times the
    size. Padded to keep the size (common practice)."""

    def __init__(self, tape, r=3, c=1):
        super().__init__()
        self.tape = tape
        self.conv1 = nn.Conv2d(c, 64, 5, padding=2)
        self.conv2 = nn.Conv2d(64, 32, 3, padding=1)
        self.conv3 = nn.Conv2d(32, c * r * r, 3, padding=1)
        self.shuffle = nn.PixelShuffle(r)

    def forward(self, x):
        t = self.tape
        x = t("act", torch.tanh(t("conv", self.conv1(x))))
        x = t("act", torch.tanh(t("conv", self.conv2(x))))
        x = t("conv", self.conv3(x))
        return t("to-space", self.shuffle(x))


class Ghost(nn.Module):
    """Han et al. 2020, section 3.1: m = ⌈oup/s⌉ intrinsic maps from a 1×1
    convolution with batch norm (and ReLU), s − 1 ghosts of each from a
    cheap 3×3 depthwise convolution (batch norm, ReLU), the two joined
    along the channels and the first oup kept."""

    def __init__(self, tape, inp, oup, s, relu=True):
        super().__init__()
        self.tape, self.oup, self.relu = tape, oup, relu
        m = math.ceil(oup / s)
        self.primary = nn.Conv2d(inp, m, 1, bias=False)
        self.primary_bn = nn.BatchNorm2d(m)
        self.cheap = nn.Conv2d(m, m * (s - 1), 3, padding=1, groups=m, bias=False)
        self.cheap_bn = nn.BatchNorm2d(m * (s - 1))

    def forward(self, x):
        t = self.tape
        x1 = t("norm", self.primary_bn(t("conv", self.primary(x))))
        if self.relu:
            x1 = t("act", torch.relu(x1))
        x2 = t("norm", self.cheap_bn(t("conv", self.cheap(x1))))
        if self.relu:
            x2 = t("act", torch.relu(x2))
        out = t("cat", torch.cat([x1, x2], 1))
        return t("keep", out[:, :self.oup, :, :])


class Bottleneck(nn.Module):
    """Han et al. 2020, Fig. 3 (stride 1, from memory): a Ghost module that
    expands (with ReLU), one that projects (without), and the input added."""

    def __init__(self, tape, c, exp, s):
        super().__init__()
        self.tape = tape
        self.expand = Ghost(tape, c, exp, s)
        self.project = Ghost(tape, exp, c, s, relu=False)

    def forward(self, x):
        return self.tape("add", self.project(self.expand(x)) + x)


class GhostStack(nn.Module):
    """The layout of testdata/papers/ghost-bottlenecks.yaml: a bottleneck
    16 → 40 → 16 with s = 3, a Ghost module 16 → 24 with s = 2, a
    bottleneck 24 → 72 → 24 with s = 2."""

    def __init__(self, tape):
        super().__init__()
        self.tape = tape
        self.b1 = Bottleneck(tape, 16, 40, 3)
        self.g = Ghost(tape, 16, 24, 2)
        self.b2 = Bottleneck(tape, 24, 72, 2)

    def forward(self, x):
        return self.b2(self.g(self.b1(x)))


MODELS = {"upsampler": Upsampler, "ghost": GhostStack}


def saved_bytes(net, shape, batch):
    kept = {}

    def pack(t):
        st = t.storage()
        kept[st.data_ptr()] = st.nbytes()
        return t

    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        net(torch.zeros(batch, *shape))
    return sum(kept.values())


def post_order(module, prefix=""):
    """State tensors in the order forward uses them: every child's first,
    then the module's own parameters and persistent buffers."""
    for name, child in module.named_children():
        yield from post_order(child, prefix + name + ".")
    for name, p in module._parameters.items():
        if p is not None:
            yield prefix + name, p
    for name, b in module._buffers.items():
        if b is not None and name not in module._non_persistent_buffers_set:
            yield prefix + name, b


def compare(ref, path, shape, gen):
    """Random state into the reference (norm statistics from one training
    pass), copied one to one into the exported module; both run in eval
    mode on one random input."""
    spec = importlib.util.spec_from_file_location("exported", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    ex = mod.MODEL()
    with torch.no_grad():
        for key, t in ref.state_dict().items():
            if t.is_floating_point():
                t.uniform_(-0.5, 0.5, generator=gen) if not key.endswith("running_var") else t.uniform_(0.5, 1.5, generator=gen)
    ref.train()
    with torch.no_grad():
        ref(torch.randn(4, *shape, generator=gen))
    ref.eval()
    theirs, ours = list(post_order(ref)), list(post_order(ex))
    if len(theirs) != len(ours):
        raise ValueError("the reference has %d state tensors, the export %d" % (len(theirs), len(ours)))
    with torch.no_grad():
        for (tk, tt), (ek, et) in zip(theirs, ours):
            if tt.shape != et.shape:
                raise ValueError("reference %s %s, export %s %s" % (tk, list(tt.shape), ek, list(et.shape)))
            et.copy_(tt)
    ex.eval()
    x = torch.randn(2, *shape, generator=gen)
    with torch.no_grad():
        want, got = ref(x), ex(x)
    if want.shape != got.shape:
        raise ValueError("outputs differ in shape: %s, %s" % (list(want.shape), list(got.shape)))
    return (want - got).abs().max().item(), want.abs().max().item(), len(theirs)


def main():
    torch.set_num_threads(2)
    for line in sys.stdin:
        job = json.loads(line)
        res = {"name": job["name"]}
        try:
            shape = job["input"]
            tape = Tape()
            torch.manual_seed(0)
            net = MODELS[job["model"]](tape)
            res["params"] = sum(p.numel() for p in net.parameters() if p.requires_grad)
            res["buffers"] = sum(b.numel() for b in net.buffers())
            tape.rows = []
            with torch.no_grad():
                net.eval()(torch.zeros(1, *shape))
            res["rows"], tape.rows = tape.rows, None
            net.train()
            res["saved_per_sample"] = (saved_bytes(net, shape, 4) - saved_bytes(net, shape, 2)) // 2
            res["onnx"] = {}
            for opset in (13, 17):
                path = "%s/%s-%d.onnx" % (job["onnx_dir"], job["name"], opset)
                torch.onnx.export(net.train(), torch.zeros(2, *shape), path, training=torch.onnx.TrainingMode.PRESERVE,
                                  do_constant_folding=False, opset_version=opset)
                res["onnx"][str(opset)] = path
            diff, scale, pairs = compare(net, job["export"], shape, torch.Generator().manual_seed(0))
            res.update(max_diff=diff, scale=scale, pairs=pairs)
        except Exception as e:
            res["error"] = "".join(traceback.format_exception_only(type(e), e)).strip()
        print(json.dumps(res), flush=True)


if __name__ == "__main__":
    main()
