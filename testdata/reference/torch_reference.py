#!/usr/bin/env python3
"""Reference shapes and counts for stackfit's engine, computed by PyTorch.

Builds every reference stack as torch.nn layers, runs a dummy input through
them one layer at a time, and records per layer the output shape, the number
of trainable parameters and the number of buffer elements (forks: every
branch's layers, then the join; relative widths resolved against the
enclosing body's input as stackfit reads them); for every stack
PyTorch runs whole, also the bytes autograd keeps for the backward pass per
sample in fp32 (saved_tensors_hooks, each storage once, batch 4 minus batch
2 halved, so weights cancel). Writes
shapes.json beside this script; engine/reference_test.go compares the engine
to it exactly.

Run with Debian's python3-torch:  /usr/bin/python3 testdata/reference/torch_reference.py

Stacks are written in stackfit's stack-file schema (as JSON, which the YAML
loader reads), so the Go test loads exactly what PyTorch built. The
published networks in testdata/published/ with forks, gates, relative
widths, dense links and per-position dense layers are read from their
YAML files (python3-yaml) and run at a reduced input, layers as written.
"""
import json
import os
import random
import re
import sys
import warnings

import torch
import torch.nn as nn
import torch.nn.functional as F
import yaml
from torchvision.models._utils import _make_divisible

# A relative width that resolves to 0 channels is refused at the forward
# pass; the empty weight's initialisation only warns.
warnings.filterwarnings("ignore", message="Initializing zero-element tensors")

HERE = os.path.dirname(os.path.abspath(__file__))
BATCH = 2
SEED = 20261202
GENERATED = 60
GENERATED_FORKS = 60
GENERATED_SPATIAL_GATES = 12


def pair(v):
    return (v, v) if isinstance(v, int) else tuple(v)


class Dense(nn.Module):
    """stackfit's dense layer: needs a 1×1 map (after flatten or global pooling)."""

    def __init__(self, cin, units, bias):
        super().__init__()
        self.fc = nn.Linear(cin, units, bias=bias)

    def forward(self, x):
        if x.shape[2] != 1 or x.shape[3] != 1:
            raise ValueError("dense layer reached by a spatial map")
        return self.fc(x.flatten(1))[:, :, None, None]


class PositionDense(nn.Module):
    """stackfit's per-position dense layer: nn.Linear over the channels at
    every position of the map (ConvNeXt's pointwise layers, Liu et al. 2022,
    as torchvision's CNBlock writes them: permute, Linear, permute back)."""

    def __init__(self, cin, units, bias):
        super().__init__()
        self.fc = nn.Linear(cin, units, bias=bias)

    def forward(self, x):
        return self.fc(x.permute(0, 2, 3, 1)).permute(0, 3, 1, 2)


class Flatten(nn.Module):
    def forward(self, x):
        return x.reshape(x.shape[0], -1, 1, 1)


class Reshape(nn.Module):
    def __init__(self, target):
        super().__init__()
        self.target = target

    def forward(self, x):
        return x.reshape(x.shape[0], *self.target)


class ChannelLayerNorm(nn.Module):
    """stackfit's layer norm: over the channels at each position."""

    def __init__(self, c, affine, eps=1e-5):
        super().__init__()
        self.norm = nn.LayerNorm(c, eps=eps, elementwise_affine=affine)

    def forward(self, x):
        return self.norm(x.permute(0, 2, 3, 1)).permute(0, 3, 1, 2)


class ChannelScale(nn.Module):
    """stackfit's scale: a learnable factor per channel, x · γ (layer scale,
    Touvron et al. 2021; ConvNeXt, Liu et al. 2022), γ starting at init."""

    def __init__(self, c, init):
        super().__init__()
        self.gamma = nn.Parameter(torch.full((c,), float(init)))

    def forward(self, x):
        return x * self.gamma[:, None, None]


class ChannelShuffle(nn.Module):
    """stackfit's shuffle (ShuffleNet, Zhang et al. 2018): channels as
    (groups, C/groups), transposed, flattened. PyTorch 1.13's own
    nn.ChannelShuffle gives the same values (checked in main) but has no
    backward, so the training run uses this form."""

    def __init__(self, groups):
        super().__init__()
        self.groups = groups

    def forward(self, x):
        n, c, h, w = x.shape
        if c % self.groups:
            raise ValueError(f"{c} channels do not split into {self.groups} groups")
        return x.reshape(n, self.groups, c // self.groups, h, w).transpose(1, 2).reshape(n, c, h, w)


class Keep(nn.Module):
    """stackfit's keep: the first n channels, x[:, :n] (the Ghost module's
    out[:, :oup], Han et al. 2020), a view of the input. Basic slicing
    would keep all C channels of a narrower map without a word; stackfit
    refuses n > C, and so does this form."""

    def __init__(self, n):
        super().__init__()
        self.n = n

    def forward(self, x):
        if self.n > x.shape[1]:
            raise ValueError(f"keep {self.n} of {x.shape[1]} channels")
        return x[:, :self.n]


class SpatialGate(nn.Module):
    """stackfit's spatial gate (CBAM's spatial attention, Woo et al. 2018,
    eq. 3): x · σ(conv_k×k([mean_c x; max_c x])), padded by (k − 1)/2 to
    keep the size, with an optional batch norm before the sigmoid (the
    authors' code). An even kernel cannot keep the size: refused."""

    def __init__(self, kernel, bias, norm):
        super().__init__()
        if kernel % 2 == 0:
            raise ValueError(f"even spatial gate kernel {kernel}")
        self.conv = nn.Conv2d(2, 1, kernel, padding=kernel // 2, bias=bias)
        self.norm = nn.BatchNorm2d(1) if norm else nn.Identity()

    def forward(self, x):
        pooled = torch.cat([torch.mean(x, 1, keepdim=True), torch.max(x, 1, keepdim=True)[0]], 1)
        return x * torch.sigmoid(self.norm(self.conv(pooled)))


def build(layer, c):
    """Returns the torch module for one stack-file layer on c input channels."""
    if layer == "spatial-gate":
        return SpatialGate(7, True, False)
    if isinstance(layer, dict) and "spatial-gate" in layer:
        return SpatialGate(layer["spatial-gate"], layer.get("bias", True), layer.get("batch-norm", False))
    if "conv" in layer or "deconv" in layer:
        transposed = "deconv" in layer
        filters = layer["deconv" if transposed else "conv"]
        k = pair(layer["kernel"])
        s = pair(layer.get("stride", 1))
        d = pair(layer.get("dilation", 1))
        p = layer.get("pad", 0)
        p = p if isinstance(p, str) else pair(p)
        g = layer.get("groups", 1)
        g = c if g == "depthwise" else g
        bias = layer.get("bias", True)
        if transposed:
            if isinstance(p, str):
                raise ValueError("string padding on a transposed convolution")
            return nn.ConvTranspose2d(c, filters, k, s, p, pair(layer.get("out-pad", 0)), g, bias, d)
        return nn.Conv2d(c, filters, k, s, p, d, g, bias)
    if "pool" in layer:
        k = pair(layer["kernel"])
        s = pair(layer.get("stride", layer["kernel"]))
        p = pair(layer.get("pad", 0))
        ceil = layer.get("ceil", False)
        if layer["pool"] == "max":
            return nn.MaxPool2d(k, s, p, ceil_mode=ceil)
        return nn.AvgPool2d(k, s, p, ceil_mode=ceil)
    if "global-pool" in layer:
        return nn.AdaptiveMaxPool2d(1) if layer["global-pool"] == "max" else nn.AdaptiveAvgPool2d(1)
    if "pool-to" in layer:
        return nn.AdaptiveAvgPool2d(pair(layer["pool-to"]))
    if "upsample" in layer:
        mode = layer.get("mode", "nearest")
        f = pair(layer["upsample"])
        return nn.Upsample(scale_factor=(float(f[0]), float(f[1])), mode=mode,
                           align_corners=False if mode == "bilinear" else None)
    if "norm" in layer:
        kind = layer["norm"]
        eps = layer.get("eps", 1e-5)  # PyTorch's default
        if kind == "batch":
            return nn.BatchNorm2d(c, eps=eps, affine=layer.get("affine", True))
        if kind == "group":
            return nn.GroupNorm(layer["groups"], c, eps=eps, affine=layer.get("affine", True))
        if kind == "instance":
            return nn.InstanceNorm2d(c, eps=eps, affine=layer.get("affine", False))
        return ChannelLayerNorm(c, layer.get("affine", True), eps)
    if "act" in layer:
        return {
            "relu": nn.ReLU(),
            "leaky-relu": nn.LeakyReLU(layer.get("slope", 0.01)),
            "gelu": nn.GELU(),
            "silu": nn.SiLU(),
            "sigmoid": nn.Sigmoid(),
            "tanh": nn.Tanh(),
            "relu6": nn.ReLU6(),
            "hard-swish": nn.Hardswish(),
            "hard-sigmoid": nn.Hardsigmoid(),
            "mish": nn.Mish(),
            "softmax": nn.Softmax(dim=1),
            "prelu": nn.PReLU(c if layer.get("per-channel") else 1, init=layer.get("slope", 0.25)),
        }[layer["act"]]
    if layer == "scale" or "scale" in layer:
        return ChannelScale(c, 1.0 if layer == "scale" else layer["scale"])
    if "shuffle" in layer:
        return ChannelShuffle(layer["shuffle"])
    if "to-space" in layer:
        return nn.PixelShuffle(layer["to-space"])
    if "to-channels" in layer:
        return nn.PixelUnshuffle(layer["to-channels"])
    if "keep" in layer:
        return Keep(layer["keep"])
    if "dropout" in layer:
        return nn.Dropout(layer["dropout"])
    if layer == "flatten":
        return Flatten()
    if "dense" in layer:
        if layer.get("per-position"):
            return PositionDense(c, layer["dense"], layer.get("bias", True))
        return Dense(c, layer["dense"], layer.get("bias", True))
    if "reshape" in layer:
        return Reshape(tuple(layer["reshape"]))
    raise ValueError(f"unknown layer {layer}")


STRIDED = ("conv", "deconv", "pool")
WIDTHS = ("conv", "deconv", "dense")


def kind_of(layer):
    return layer if isinstance(layer, str) else next(iter(layer))  # "flatten", "scale"


def branch_layers(branch):
    """A fork's branch: a list of layers, or {layers: [...], name: ...}."""
    return (branch.get("layers") or []) if isinstance(branch, dict) else branch


def relative_width(text, round_to, ref):
    """A relative width on an input of ref channels: "xF" is F·ref, rounded
    half to even as Python's round does (torchvision's MobileNetV2 writes
    int(round(inp * expand_ratio))); "/D" is ref // D; with round_to the
    unrounded value goes through torchvision's _make_divisible instead."""
    if text.startswith("/"):
        v = ref // int(text[1:])
        return _make_divisible(v, round_to) if round_to else v
    v = ref * float(text.lstrip("x"))
    return _make_divisible(v, round_to) if round_to else round(v)


def resolve(layer, body_ref, block_ref):
    """The layer with a relative width (conv: x6, /4) written out as the
    channel count it resolves to."""
    if not isinstance(layer, dict):
        return layer
    for key in WIDTHS:
        if key in layer and isinstance(layer[key], str):
            ref = block_ref if layer.get("relative-to") == "block" else body_ref
            n = relative_width(layer[key], layer.get("round", 0), ref)
            layer = {k: v for k, v in layer.items() if k not in ("relative-to", "round")}
            layer[key] = n
    return layer


def unresolved_rows(layers):
    """How many rows stackfit writes for layers whose input is unknown (the
    branches of a split fork it refuses): every layer one, a block's
    repeats with their addition (and activation) or concatenation, a gate's
    multiplication and a fork's join, but no projection shortcut."""
    n = 0
    for l in layers:
        k = kind_of(l)
        if k == "block":
            per = unresolved_rows(l["layers"])
            if l.get("residual"):
                per += 1 + ("after" in l)
            if l.get("dense-links"):
                per += 1
            n += per * l["block"]
        elif k == "gate":
            n += unresolved_rows(l["layers"]) + 1
        elif k == "fork":
            n += sum(unresolved_rows(branch_layers(b)) for b in l["branches"]) + 1
        else:
            n += 1
    return n


class Refused(ValueError):
    """A refusal that stackfit reports after rows it cannot compute: skip
    is how many rows come before the one that carries the error."""

    def __init__(self, message, skip):
        super().__init__(message)
        self.skip = skip


def body_stride(layers, un):
    """A block repeat's total stride, from the strides written in its body
    (forks: their widest branch's; nested blocks: the repeats that keep
    their strides)."""
    sh = sw = 1
    for b in layers:
        k = kind_of(b)
        if k in ("conv", "pool") and not un:
            st = pair(b.get("stride", b["kernel"] if k == "pool" else 1))
        elif k == "fork":
            st = (1, 1)
            for br in b["branches"]:
                t = body_stride(branch_layers(br), un)
                st = (max(st[0], t[0]), max(st[1], t[1]))
        elif k == "block":
            st = body_stride(b["layers"], un)
            if b.get("strides") == "all":
                st = (st[0] ** b["block"], st[1] ** b["block"])
        else:
            continue
        sh, sw = sh * st[0], sw * st[1]
    return sh, sw


def center_crop(x, h, w):
    top, left = (x.shape[2] - h) // 2, (x.shape[3] - w) // 2
    return x[:, :, top:top + h, left:left + w]


class Runner:
    """Runs a stack the way stackfit reads it: blocks repeat their body (later
    repeats with stride 1 unless strides: all), residual blocks add a
    shortcut (a strided 1×1 convolution plus batch norm when the shape
    changes, He et al. 2016 option B), concat/add merge a named output."""

    def __init__(self, train=False):
        self.rows = []
        self.taps = {}
        self.train = train
        # Input channels of each open body, innermost last: (the body's, the
        # innermost block repeat's), for relative widths.
        self.refs = []

    def stack(self, layers, x):
        self.refs = [(x.shape[1], x.shape[1])]  # the stack input at top level
        return self.items(layers, [], x, False)

    def mode(self, m):
        return m.train() if self.train else m.eval()

    def row(self, path, y, m):
        self.rows.append({
            "path": ".".join(path),
            "out": list(y.shape[1:]),
            "params": sum(p.numel() for p in m.parameters()) if m is not None else 0,
            "buffers": sum(b.numel() for b in m.buffers()) if m is not None else 0,
        })
        if min(y.shape[1:]) < 1:
            raise ValueError("empty output")

    def items(self, layers, prefix, x, unstrided):
        for i, layer in enumerate(layers):
            path = prefix + [str(i + 1)]
            if isinstance(layer, dict) and "block" in layer:
                x = self.block(layer, path, x, unstrided)
            elif isinstance(layer, dict) and "gate" in layer:
                x = self.gate(layer, path, x, unstrided)
            elif isinstance(layer, dict) and "fork" in layer:
                x = self.fork(layer, path, x, unstrided)
            else:
                x = self.one(layer, path, x, unstrided)
            if isinstance(layer, dict) and "name" in layer:
                self.taps[layer["name"]] = x
        return x

    def one(self, layer, path, x, unstrided):
        if layer == "global-pool":
            layer = {"global-pool": "avg"}  # stackfit's bare global-pool averages
        kind = kind_of(layer)
        if kind in ("concat", "add"):
            other = self.taps[layer[kind]]  # KeyError: unknown or later name
            if layer.get("crop"):
                h, w = min(x.shape[2], other.shape[2]), min(x.shape[3], other.shape[3])
                x, other = center_crop(x, h, w), center_crop(other, h, w)
            if kind == "concat":
                y = torch.cat([x, other], 1)
            else:
                if x.shape != other.shape:
                    raise ValueError("added maps differ")
                y = x + other
            self.row(path, y, None)
            return y
        if unstrided and kind in STRIDED:
            layer = dict(layer, stride=1)
        layer = resolve(layer, *self.refs[-1])
        m = self.mode(build(layer, x.shape[1]))
        y = m(x)
        self.row(path, y, m)
        return y

    def gate(self, layer, path, x, unstrided):
        """A channel gate: its layers compute a C×1×1 gate from the map, which
        then multiplies the map (squeeze-and-excitation, Hu et al. 2018)."""
        gp = path + ["1"]
        self.refs.append((x.shape[1], self.refs[-1][1]))
        g = self.items(layer["layers"], gp, x, unstrided)
        self.refs.pop()
        if tuple(g.shape[1:]) != (x.shape[1], 1, 1):
            raise ValueError("a channel gate must end in C×1×1")
        y = x * g
        self.row(gp + ["mul"], y, None)
        return y

    def fork(self, layer, path, x, unstrided):
        """Parallel branches from one map, joined along the channels in
        order (GoogLeNet's Inception modules, Szegedy et al. 2015). copy:
        each branch reads the map itself; split: each reads its share, a
        view from torch.chunk (ShuffleNet V2, Ma et al. 2018, as torchvision
        writes it: x.chunk(2, dim=1)). An empty branch passes its input on."""
        branches = layer["branches"]
        n = len(branches)
        if layer["fork"] == "split" and n:
            if x.shape[1] % n:
                # torch.chunk would hand out unequal shares (or fewer of them).
                raise Refused(f"{x.shape[1]} channels do not split into {n} equal shares",
                              sum(unresolved_rows(branch_layers(b)) for b in branches))
            parts = torch.chunk(x, n, 1)
        else:
            parts = [x] * n
        outs = []
        for b, (br, xb) in enumerate(zip(branches, parts)):
            self.refs.append((xb.shape[1], self.refs[-1][1]))
            y = self.items(branch_layers(br), path + [str(b + 1)], xb, unstrided)
            self.refs.pop()
            if isinstance(br, dict) and "name" in br:
                self.taps[br["name"]] = y
            outs.append(y)
        y = torch.cat(outs, 1)  # refuses no branches, or maps of different sizes
        self.row(path + ["join"], y, None)
        return y

    def drop_path(self, x, p):
        """Stochastic depth on a residual branch (Huang et al. 2016), one
        keep-or-drop draw per sample, kept samples scaled by 1 / (1 - p)."""
        if not self.train or p == 0:
            return x
        noise = torch.empty([x.shape[0], 1, 1, 1], dtype=x.dtype).bernoulli_(1 - p)
        return x * noise.div_(1 - p)

    def block(self, layer, path, x, unstrided):
        for rep in range(1, layer["block"] + 1):
            rp = path + [str(rep)]
            inp = x
            un = unstrided or (rep > 1 and layer.get("strides", "first") != "all")
            self.refs.append((x.shape[1], x.shape[1]))
            x = self.items(layer["layers"], rp, x, un)
            self.refs.pop()
            if layer.get("dense-links"):
                # Dense connectivity (Huang et al. 2017): the repeat's input,
                # then its output, along the channels.
                if x.shape[2:] != inp.shape[2:]:
                    raise ValueError("a densely linked repeat changed the map size")
                x = torch.cat([inp, x], 1)
                self.row(rp + ["cat"], x, None)
            if not layer.get("residual"):
                continue
            sc = inp
            if sc.shape != x.shape and layer.get("shortcut") == "identity":
                # An inverted residual adds its input only where shapes match.
                if "after" in layer:
                    act = build({"act": layer["after"]}, x.shape[1])
                    x = act(x)
                    self.row(rp + ["act"], x, act)
                continue
            if sc.shape != x.shape:
                sh, sw = body_stride(layer["layers"], un)
                norm = layer.get("shortcut-norm", True)
                conv = self.mode(nn.Conv2d(inp.shape[1], x.shape[1], 1, (sh, sw), bias=not norm))
                sc = conv(inp)
                self.row(rp + ["s1"], sc, conv)
                if norm:
                    bn = self.mode(nn.BatchNorm2d(x.shape[1]))
                    sc = bn(sc)
                    self.row(rp + ["s2"], sc, bn)
            if sc.shape != x.shape:
                raise ValueError("shortcut shape differs")
            x = self.drop_path(x, layer.get("drop-path", 0)) + sc
            self.row(rp + ["add"], x, None)
            if "after" in layer:
                act = build({"act": layer["after"]}, x.shape[1])
                x = act(x)
                self.row(rp + ["act"], x, act)
        return x


def saved_bytes(stack, batch):
    """Bytes of the tensors autograd keeps for the backward pass when the
    stack runs in training mode on a batch, each storage counted once."""
    kept = {}

    def pack(t):
        st = t.storage()
        kept[st.data_ptr()] = st.nbytes()
        return t

    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        Runner(train=True).stack(stack["layers"], torch.zeros(batch, *stack["input"]))
    return sum(kept.values())


def saved_per_sample(stack):
    """Activation bytes kept per sample: the difference between batches of
    4 and 2 removes the weights and other batch-independent tensors."""
    torch.manual_seed(0)
    return (saved_bytes(stack, 4) - saved_bytes(stack, 2)) // 2


def run(stack):
    """Runs the stack; returns per-row results and the index of the first row
    PyTorch refused (None when all ran)."""
    r = Runner()
    x = torch.zeros(BATCH, *stack["input"])
    try:
        with torch.no_grad():
            r.stack(stack["layers"], x)
    except Exception as e:  # PyTorch's refusal is the reference verdict
        bad = len(r.rows) + getattr(e, "skip", 0)
        if r.rows and r.rows[-1]["out"] and min(r.rows[-1]["out"]) < 1:
            bad -= 1
            r.rows.pop()
        return r.rows, bad, (str(e).splitlines() or [type(e).__name__])[0][:200]
    return r.rows, None, None


# ---- published stacks (the numbers of their papers are checked elsewhere) --

def vgg(cfg, bn):
    layers = []
    for v in cfg:
        if v == "M":
            layers.append({"pool": "max", "kernel": 2})
        else:
            layers.append({"conv": v, "kernel": 3, "pad": 1})
            if bn:
                layers.append({"norm": "batch"})
            layers.append({"act": "relu"})
    layers += [{"pool-to": 7}, "flatten", {"dense": 4096}, {"act": "relu"}, {"dropout": 0.5},
               {"dense": 4096}, {"act": "relu"}, {"dropout": 0.5}, {"dense": 1000}]
    return layers


def published():
    a = [64, "M", 128, "M", 256, 256, "M", 512, 512, "M", 512, 512, "M"]
    d = [64, 64, "M", 128, 128, "M", 256, 256, 256, "M", 512, 512, 512, "M", 512, 512, 512, "M"]
    yield "VGG-11 (torchvision layout)", [3, 224, 224], vgg(a, False)
    yield "VGG-16 with batch norm (torchvision layout)", [3, 224, 224], vgg(d, True)
    yield "AlexNet (torchvision layout)", [3, 224, 224], [
        {"conv": 64, "kernel": 11, "stride": 4, "pad": 2}, {"act": "relu"}, {"pool": "max", "kernel": 3, "stride": 2},
        {"conv": 192, "kernel": 5, "pad": 2}, {"act": "relu"}, {"pool": "max", "kernel": 3, "stride": 2},
        {"conv": 384, "kernel": 3, "pad": 1}, {"act": "relu"}, {"conv": 256, "kernel": 3, "pad": 1}, {"act": "relu"},
        {"conv": 256, "kernel": 3, "pad": 1}, {"act": "relu"}, {"pool": "max", "kernel": 3, "stride": 2},
        {"pool-to": 6}, "flatten", {"dropout": 0.5}, {"dense": 4096}, {"act": "relu"}, {"dropout": 0.5},
        {"dense": 4096}, {"act": "relu"}, {"dense": 1000}]
    yield "LeNet-5 (plain pooling, full C3)", [1, 32, 32], [
        {"conv": 6, "kernel": 5}, {"act": "tanh"}, {"pool": "avg", "kernel": 2}, {"conv": 16, "kernel": 5},
        {"act": "tanh"}, {"pool": "avg", "kernel": 2}, {"conv": 120, "kernel": 5}, {"act": "tanh"},
        {"dense": 84}, {"act": "tanh"}, {"dense": 10}]
    yield "DCGAN generator (Radford et al. 2015, PyTorch k5 s2 p2 op1 steps)", [100, 1, 1], [
        {"dense": 4 * 4 * 1024}, {"reshape": [1024, 4, 4]}, {"norm": "batch"}, {"act": "relu"},
        {"deconv": 512, "kernel": 5, "stride": 2, "pad": 2, "out-pad": 1}, {"norm": "batch"}, {"act": "relu"},
        {"deconv": 256, "kernel": 5, "stride": 2, "pad": 2, "out-pad": 1}, {"norm": "batch"}, {"act": "relu"},
        {"deconv": 128, "kernel": 5, "stride": 2, "pad": 2, "out-pad": 1}, {"norm": "batch"}, {"act": "relu"},
        {"deconv": 3, "kernel": 5, "stride": 2, "pad": 2, "out-pad": 1}, {"act": "tanh"}]


class StackLoader(yaml.SafeLoader):
    """PyYAML's safe loader with YAML 1.2's floats, as stackfit's loader
    (gopkg.in/yaml.v3) reads them: PyYAML follows YAML 1.1, where 1e-06
    (no dot) is a string."""


StackLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$|^[-+]?\.(?:inf|Inf|INF)$|^\.(?:nan|NaN|NAN)$"),
    list("-+0123456789."))
# Integers stay integers: the int resolver PyYAML registered first wins.

# The published networks that use forks, gates, relative widths, dense
# links and per-position dense layers, with the input side they run at
# here (each file's own input is 224×224; a smaller map keeps autograd's
# run quick, and each net still reaches its head without a refusal).
# SqueezeNet runs at 66: its stem then leaves 32×32, and all three of its
# ceil-mode pools round up (32 → 16 → 8 → 4; at 64 every one divides
# evenly), as GoogLeNet's first three do at 64 (32 → 16 → 8 → 4).
PUBLISHED_FILES = [
    ("mobilenet-v2.yaml", 64),
    ("mobilenet-v3-small.yaml", 64),
    ("efficientnet-b0.yaml", 64),
    ("densenet121.yaml", 64),
    ("squeezenet1-1.yaml", 66),
    ("googlenet.yaml", 64),
    ("convnext-tiny.yaml", 64),
]


def published_files():
    """The files' layers as written (the Go test loads them through
    stackfit's loader again), on an input of side `size`."""
    for file, size in PUBLISHED_FILES:
        with open(os.path.join(HERE, "..", "published", file)) as f:
            doc = yaml.load(f, Loader=StackLoader)
        layers = written_out(doc["layers"], doc.get("units") or {}, doc.get("defaults") or {})
        yield (f"{doc['name']} (testdata/published/{file}) at {size}×{size}",
               [doc["input"][0], size, size], layers)


def written_out(layers, units, defaults):
    """A file's layers with every unit use replaced by its unit's layers
    (arguments over the unit's defaults put in for each $name, the use a
    block of `repeat` rounds, named as the use) and the file's per-kind
    defaults filled into every layer that does not set the field: what
    stackfit's loader does (README, "Units" and "File defaults")."""
    def put(v, args):
        if isinstance(v, str) and v.startswith("$"):
            return args[v[1:]]
        if isinstance(v, list):
            return [put(x, args) for x in v]
        if isinstance(v, dict):
            return {k: put(x, args) for k, x in v.items()}
        return v

    def walk(items):
        out = []
        for layer in items:
            if isinstance(layer, dict) and "unit" in layer:
                unit = units[layer["unit"]]
                args = dict(unit.get("params") or {})
                args.update({k: v for k, v in layer.items() if k not in ("unit", "repeat", "name", "note")})
                block = {"block": layer.get("repeat", 1), "layers": walk(put(unit["layers"], args))}
                if "name" in layer:
                    block["name"] = layer["name"]
                out.append(block)
                continue
            if isinstance(layer, dict):
                layer = dict(layer)
                for k, v in (defaults.get(kind_of(layer)) or {}).items():
                    layer.setdefault(k, v)
                if "layers" in layer:
                    layer["layers"] = walk(layer["layers"])
                if "branches" in layer:
                    layer["branches"] = [walk(b) if isinstance(b, list) else dict(b, layers=walk(b.get("layers") or []))
                                         for b in layer["branches"]]
            out.append(layer)
        return out
    return walk(layers)


# ---- generated stacks: every kind, odd sizes, some PyTorch must refuse ----

def maybe_pair(rng, lo, hi):
    a = rng.randint(lo, hi)
    return a if rng.random() < 0.6 else [a, rng.randint(lo, hi)]


def random_layer(rng, c, kind, hw=None):
    if kind in ("conv", "deconv"):
        f = rng.choice([1, 3, 6, 8, 12, 16, 24, 30, 32])
        l = {kind: f, "kernel": maybe_pair(rng, 1, 7)}
        if rng.random() < 0.5:
            l["stride"] = maybe_pair(rng, 1, 3)
        r = rng.random()
        if r < 0.15 and kind == "conv" and "stride" not in l:
            l["pad"] = rng.choice(["same", "valid"])
        elif r < 0.7:
            l["pad"] = maybe_pair(rng, 0, 3)
        if rng.random() < 0.25:
            l["dilation"] = maybe_pair(rng, 1, 3)
        if rng.random() < 0.25:
            g = rng.choice([2, 3, 4])
            if rng.random() < 0.5:
                l["groups"] = "depthwise"
                l[kind] = c * rng.choice([1, 2])
            else:
                l["groups"] = g
        if rng.random() < 0.3:
            l["bias"] = False
        if kind == "deconv" and rng.random() < 0.4:
            l["out-pad"] = maybe_pair(rng, 0, 1)
        return l
    if kind == "pool":
        l = {"pool": rng.choice(["max", "avg"]), "kernel": maybe_pair(rng, 1, 4)}
        if rng.random() < 0.5:
            l["stride"] = maybe_pair(rng, 1, 3)
        if rng.random() < 0.4:
            l["pad"] = rng.randint(0, 2)
        if rng.random() < 0.4:
            l["ceil"] = True
        return l
    if kind == "global-pool":
        return {"global-pool": rng.choice(["avg", "max"])}
    if kind == "pool-to":
        return {"pool-to": maybe_pair(rng, 1, 9)}
    if kind == "upsample":
        l = {"upsample": maybe_pair(rng, 1, 3)}
        if rng.random() < 0.5:
            l["mode"] = "bilinear"
        return l
    if kind == "norm":
        n = rng.choice(["batch", "group", "instance", "layer"])
        l = {"norm": n}
        if n == "group":
            l["groups"] = rng.choice([1, 2, 3, 4, 8])
        if rng.random() < 0.3:
            l["affine"] = rng.random() < 0.5
        return l
    if kind == "act":
        a = rng.choice(["relu", "leaky-relu", "gelu", "silu", "sigmoid", "tanh", "relu6", "hard-swish", "hard-sigmoid"])
        l = {"act": a}
        if a == "leaky-relu" and rng.random() < 0.5:
            l["slope"] = 0.2
        return l
    if kind == "dropout":
        return {"dropout": rng.choice([0.1, 0.25, 0.5])}
    if kind == "flatten":
        return "flatten"
    if kind == "dense":
        l = {"dense": rng.choice([5, 10, 16, 33, 64])}
        if rng.random() < 0.3:
            l["bias"] = False
        return l
    if kind == "reshape":
        return None  # filled in by the caller, which knows the element count
    if kind == "scale":
        return "scale" if rng.random() < 0.2 else {"scale": rng.choice([1e-6, 1e-5, 0.1, 1.0, 0.0])}
    if kind == "spatial-gate":
        if rng.random() < 0.2:
            return "spatial-gate"
        l = {"spatial-gate": rng.choice([1, 3, 5, 7, 7, 7, 9, 4])}  # 4: refused (even)
        if rng.random() < 0.3:
            l["bias"] = False
        if rng.random() < 0.3:
            l["batch-norm"] = True
        return l
    if kind == "shuffle":
        fits = [g for g in range(2, 9) if c % g == 0]
        misfits = [g for g in range(2, 9) if c % g]
        if misfits and (not fits or rng.random() < 0.2):
            return {"shuffle": rng.choice(misfits)}  # PyTorch refuses it
        return {"shuffle": rng.choice(fits or [1])}
    if kind == "to-space":
        fits = [r for r in (2, 3) if c % (r * r) == 0]
        if rng.random() < 0.15 or not fits and rng.random() < 0.3:
            return {"to-space": rng.choice([2, 3])}  # refused unless r² divides c
        return {"to-space": rng.choice(fits or [1])}
    if kind == "to-channels":
        h, w = hw or (0, 0)
        fits = [r for r in (2, 3) if h % r == 0 and w % r == 0]
        if rng.random() < 0.15 or not fits and rng.random() < 0.3:
            return {"to-channels": rng.choice([2, 3])}  # refused unless r divides H and W
        return {"to-channels": rng.choice(fits or [1])}
    if kind == "keep":
        if rng.random() < 0.1:
            return {"keep": c + 1}  # refused
        return {"keep": rng.randint(1, c)}
    if kind in ("mish", "softmax"):
        return {"act": kind}
    if kind == "prelu":
        l = {"act": "prelu"}
        if rng.random() < 0.5:
            l["per-channel"] = True
        if rng.random() < 0.3:
            l["slope"] = rng.choice([0.1, 0.5])
        return l
    raise ValueError(kind)


KINDS = ["conv", "deconv", "pool", "global-pool", "pool-to", "upsample", "norm", "act",
         "dropout", "flatten", "dense", "reshape", "scale", "shuffle", "block", "concat", "add", "gate", "fork",
         "to-space", "to-channels", "keep", "spatial-gate"]
SINGLE = 14  # KINDS[:SINGLE] are the kinds random_layer writes in the first generated cases
REARRANGING = ["to-space", "to-channels", "keep"]  # random_layer writes these too, in cases of their own
GENERATED_REARRANGING = 18
# Activations random_layer writes too (as act), in cases of their own: Mish
# (Misra 2019), the softmax over the channels, PReLU (He et al. 2015).
ACTIVATING = ["mish", "softmax", "prelu"]
GENERATED_ACTIVATING = 18
FEATURES = ["fork copy", "fork split", "fork in a branch", "fork in a residual block", "named branch", "empty branch",
            "relative x-factor", "relative divisor", "round", "relative-to block", "per-position dense", "norm eps"]


def generated(rng, n, kinds=KINDS[:SINGLE], focused=KINDS[:SINGLE], label="generated"):
    for i in range(n):
        c, h, w = rng.choice([1, 3, 4, 6, 8, 16]), rng.randint(5, 67), rng.randint(5, 67)
        layers = []
        x = torch.zeros(1, c, h, w)
        # The first layers of each case favour one kind in turn, so every kind appears.
        focus = focused[i % len(focused)]
        for j in range(rng.randint(4, 12)):
            kind = focus if j in (1, 3) else rng.choice(kinds)
            if kind in ("dense", "reshape") and rng.random() < 0.85:
                layers.append("flatten")
                x = x.reshape(1, -1, 1, 1)
            if kind == "reshape":
                n_el = x.numel()
                # A valid reshape most of the time; now and then a count PyTorch refuses.
                divs = [d for d in range(1, 9) if n_el % (d * d) == 0]
                d = rng.choice(divs)
                tgt = [n_el // (d * d), d, d]
                if rng.random() < 0.2:
                    tgt[0] += 1
                layer = {"reshape": tgt}
            else:
                layer = random_layer(rng, x.shape[1], kind, tuple(x.shape[2:]))
            layers.append(layer)
            try:
                m = build(layer, x.shape[1]).eval()
                with torch.no_grad():
                    x = m(torch.cat([x, x]))[:1]
                if min(x.shape[1:]) < 1:
                    break
            except Exception:
                break  # the case ends on the layer PyTorch refuses
        yield f"{label} {i + 1:02d} ({focus})", [c, h, w], layers


# ---- blocks and merges ----

def conv(f, k, s=1, p=0, bias=False):
    d = {"conv": f, "kernel": k}
    if s != 1:
        d["stride"] = s
    if p:
        d["pad"] = p
    if not bias:
        d["bias"] = False
    return d


BN, RELU = {"norm": "batch"}, {"act": "relu"}


def basic(c, s):
    return [conv(c, 3, s, 1), BN, RELU, conv(c, 3, 1, 1), BN]


def bottleneck(c, s, paper):
    return [conv(c, 1, s if paper else 1), BN, RELU, conv(c, 3, 1 if paper else s, 1), BN, RELU, conv(4 * c, 1), BN]


def res(n, body, **kw):
    d = {"block": n, "residual": True, "after": "relu", "layers": body}
    d.update(kw)
    return d


def block_cases(rng):
    yield "residual identity, 2 repeats", [16, 20, 20], [res(2, basic(16, 1))]
    yield "residual projection: stride 2 and wider", [16, 21, 21], [res(3, basic(32, 2))]
    yield "bottleneck, stride on the 3×3 (torchvision)", [64, 28, 28], [res(3, bottleneck(32, 2, False))]
    yield "bottleneck, stride on the first 1×1 (paper)", [64, 28, 28], [res(3, bottleneck(32, 2, True))]
    yield "projection without shortcut norm", [8, 17, 17], [res(2, [conv(24, 3, 2, 1, True), RELU, conv(24, 3, 1, 1, True)], **{"shortcut-norm": False})]
    yield "strides on every repeat", [8, 32, 32], [res(3, basic(16, 2), strides="all")]
    yield "nested blocks", [8, 24, 24], [{"block": 2, "name": "outer", "layers": [res(2, basic(16, 1)), {"pool": "max", "kernel": 2}]}]
    yield "repeated pooling block, later repeats unstrided", [4, 19, 23], [{"block": 3, "layers": [{"pool": "max", "kernel": 2, "pad": 1}, conv(8, 3, 1, 1)]}]
    yield "dense-style concatenation", [16, 12, 12], [
        dict(conv(16, 3, 1, 1), name="c1"), conv(8, 3, 1, 1), {"concat": "c1", "name": "c2"},
        conv(8, 3, 1, 1), {"concat": "c2"}, conv(32, 1)]
    yield "encoder-decoder with cropped skips", [1, 92, 92], [
        conv(8, 3, bias=True), RELU, dict(conv(8, 3, bias=True), name="e1"), {"pool": "max", "kernel": 2},
        conv(16, 3, bias=True), RELU, dict(conv(16, 3, bias=True), name="e2"), {"pool": "max", "kernel": 2},
        conv(32, 3, bias=True), RELU, conv(32, 3, bias=True), RELU,
        {"deconv": 16, "kernel": 2, "stride": 2}, {"concat": "e2", "crop": True}, conv(16, 3, bias=True), RELU,
        {"deconv": 8, "kernel": 2, "stride": 2}, {"concat": "e1", "crop": True}, conv(8, 3, bias=True), RELU,
        conv(2, 1, bias=True)]
    yield "feature-pyramid style addition with upsampling", [8, 32, 32], [
        dict(conv(16, 3, 1, 1), name="p3"), conv(16, 3, 2, 1), {"upsample": 2}, {"add": "p3"}, conv(16, 3, 1, 1)]
    yield "crop where the map here is the larger", [4, 30, 30], [
        dict(conv(8, 5), name="small"), {"upsample": 1}, {"pool-to": 20}, {"concat": "small", "crop": True}]
    yield "residual stage stack (two stages)", [32, 33, 33], [res(2, basic(32, 1), name="s1"), res(2, basic(64, 2), name="s2"), {"global-pool": "avg"}, {"dense": 10}]
    se = lambda c, s: {"gate": "channel", "layers": [{"global-pool": "avg"}, conv(s, 1, bias=True), RELU, conv(c, 1, bias=True), {"act": "sigmoid"}]}

    def inverted(cin, cout, s, t):
        return [conv(cin * t, 1), BN, {"act": "relu6"}, dict(conv(cin * t, 3, s, 1), groups="depthwise"), BN, {"act": "relu6"},
                conv(cout, 1), BN]
    yield "squeeze-and-excitation gate", [16, 14, 14], [conv(32, 3, 1, 1), BN, RELU, se(32, 8), {"global-pool": "avg"}, {"dense": 5}]
    yield "gate at the very start (only the gate learns)", [8, 9, 7], [se(8, 8), conv(8, 3, 1, 1)]
    yield "inverted residual, identity only where shapes match", [16, 24, 24], [
        {"block": 3, "residual": True, "shortcut": "identity", "layers": inverted(16, 24, 2, 6)}]
    yield "inverted residual stages with gates", [16, 20, 20], [
        {"block": 2, "residual": True, "shortcut": "identity", "layers": inverted(16, 16, 1, 4) + [se(16, 8)]},
        {"block": 2, "residual": True, "shortcut": "identity", "layers": inverted(16, 24, 2, 4)}, {"global-pool": "avg"}]
    yield "residual with stochastic depth", [16, 12, 12], [res(3, basic(16, 1), **{"drop-path": 0.2}), res(2, basic(32, 2), **{"drop-path": 0.1})]
    yield "gate nested in a gate's block", [8, 16, 16], [
        {"block": 2, "residual": True, "layers": [conv(8, 3, 1, 1), BN, RELU, se(8, 8)]}]
    yield "dense block, 4 repeats growing by 12", [24, 16, 16], [
        {"block": 4, "dense-links": True, "layers": [BN, RELU, conv(48, 1), BN, RELU, conv(12, 3, 1, 1)]}, BN]
    yield "dense blocks with a transition between", [3, 32, 32], [
        conv(16, 3, 1, 1), {"block": 3, "dense-links": True, "layers": [BN, RELU, conv(8, 3, 1, 1)]},
        BN, RELU, conv(20, 1), {"pool": "avg", "kernel": 2}, {"block": 2, "dense-links": True, "layers": [BN, RELU, conv(8, 3, 1, 1)]}]
    yield "error: a densely linked repeat that strides", [8, 16, 16], [{"block": 2, "dense-links": True, "layers": [conv(8, 3, 2, 1)]}]
    yield "error: a gate that does not end in C×1×1", [8, 10, 10], [conv(16, 3, 1, 1), {"gate": "channel", "layers": [conv(16, 1)]}]
    yield "error: a gate with the wrong channel count", [8, 10, 10], [conv(16, 3, 1, 1), se(8, 8)]
    yield "error: add with different channels", [8, 16, 16], [dict(conv(8, 1), name="a"), conv(16, 1), {"add": "a"}]
    yield "error: concat without crop on different sizes", [8, 16, 16], [dict(conv(8, 1), name="a"), {"pool": "max", "kernel": 2}, {"concat": "a"}]
    yield "error: merge with a name not yet seen", [8, 16, 16], [{"concat": "later"}, dict(conv(8, 1), name="later")]
    for i in range(6):
        c = rng.choice([8, 16])
        layers = [conv(c, 3, 1, 1)]
        for _ in range(rng.randint(1, 3)):
            w = rng.choice([c, 2 * c, 24])
            s = rng.choice([1, 2])
            kind = rng.choice(["basic", "bottle"])
            body = basic(w, s) if kind == "basic" else bottleneck(w // 2 if w > 8 else w, s, rng.random() < 0.5)
            layers.append(res(rng.randint(1, 3), body))
            c = body[-2]["conv"]
        yield f"generated residual {i + 1:02d}", [rng.choice([3, 8]), rng.randint(9, 41), rng.randint(9, 41)], layers


# ---- forks, relative widths, per-position dense layers ----

def bconv(f, k, s=1, p=0, eps=1e-3):
    """torchvision's GoogLeNet BasicConv2d: convolution without bias, batch
    norm with eps 0.001, ReLU."""
    return [conv(f, k, s, p), {"norm": "batch", "eps": eps}, RELU]


def fork(mode, *branches, **kw):
    d = {"fork": mode, "branches": list(branches)}
    d.update(kw)
    return d


def se_rel(squeeze, act="relu", gate_act="sigmoid", **kw):
    """A squeeze-and-excitation gate written with relative widths: squeeze
    to `squeeze` of the gated map (or of the block input), back to x1."""
    sq = dict(conv(squeeze, 1, bias=True), **kw)
    return {"gate": "channel", "layers": [{"global-pool": "avg"}, sq, {"act": act}, conv("x1", 1, bias=True), {"act": gate_act}]}


def shuffle_down(cin, cout):
    """ShuffleNet V2's unit with stride 2 (Ma et al. 2018, Fig. 3d, as
    torchvision's InvertedResidual writes it): both branches read the whole
    map, then a shuffle of 2."""
    half = cout // 2
    left = [dict(conv(cin, 3, 2, 1), groups="depthwise"), BN, conv(half, 1), BN, RELU]
    right = [conv(half, 1), BN, RELU, dict(conv(half, 3, 2, 1), groups="depthwise"), BN, conv(half, 1), BN, RELU]
    return [fork("copy", left, right), {"shuffle": 2}]


def shuffle_unit():
    """ShuffleNet V2's unit with stride 1 (Fig. 3c): half the channels pass
    on, the other half is transformed at its own width (x1 of the branch's
    share), then a shuffle of 2."""
    right = [conv("x1", 1), BN, RELU, dict(conv("x1", 3, 1, 1), groups="depthwise"), BN, conv("x1", 1), BN, RELU]
    return [fork("split", [], right), {"shuffle": 2}]


def fire(squeeze, e1, e3):
    """SqueezeNet's fire module (Iandola et al. 2016; torchvision's Fire)."""
    return [conv(squeeze, 1, bias=True), RELU,
            fork("copy", [conv(e1, 1, bias=True), RELU], [conv(e3, 3, 1, 1, bias=True), RELU])]


def inception(c1, r3, c3, r5, c5, pp):
    """GoogLeNet's Inception module as torchvision writes it (its "5×5"
    branch is a 3×3)."""
    return fork("copy", bconv(c1, 1), bconv(r3, 1) + bconv(c3, 3, 1, 1), bconv(r5, 1) + bconv(c5, 3, 1, 1),
                [{"pool": "max", "kernel": 3, "stride": 1, "pad": 1, "ceil": True}] + bconv(pp, 1))


def convnext_block(n, dp=0.1):
    """ConvNeXt's block (Liu et al. 2022, torchvision's CNBlock): 7×7
    depthwise convolution, layer norm (eps 1e-6), per-position dense layers
    to 4× and back, layer scale, stochastic depth, identity shortcut."""
    return {"block": n, "residual": True, "drop-path": dp, "layers": [
        {"conv": "x1", "kernel": 7, "pad": 3, "groups": "depthwise"}, {"norm": "layer", "eps": 1e-6},
        {"dense": "x4", "per-position": True}, {"act": "gelu"}, {"dense": "x1", "per-position": True}, {"scale": 1e-6}]}


def mbconv(n, cout, k, s, dp=0.0):
    """EfficientNet's MBConv (Tan & Le 2019, torchvision's MBConv):
    expansion ×6 made divisible by 8, depthwise k×k, a gate squeezing to a
    quarter of the block input (relative-to: block), projection; identity
    shortcut only where shapes match. Batch norm eps 0.001 (torchvision's
    efficientnet_b0)."""
    bn = {"norm": "batch", "eps": 1e-3}
    silu = {"act": "silu"}
    return {"block": n, "residual": True, "shortcut": "identity", "drop-path": dp, "layers": [
        dict(conv("x6", 1), round=8), bn, silu, dict(conv("x6", k, s, k // 2), round=8, groups="depthwise"), bn, silu,
        se_rel("/4", "silu", **{"relative-to": "block"}), conv(cout, 1), bn]}


def mobilenet3(n, cout, k, s, t):
    """MobileNetV3's block with a gate (Howard et al. 2019, torchvision's
    InvertedResidual): expansion ×t, depthwise k×k, a gate squeezing to
    _make_divisible(expanded // 4, 8) with a hard-sigmoid, projection."""
    bn = {"norm": "batch", "eps": 1e-3}
    return {"block": n, "residual": True, "shortcut": "identity", "layers": [
        conv(t, 1), bn, RELU, dict(conv(t, k, s, k // 2), groups="depthwise"), bn, RELU,
        se_rel("/4", gate_act="hard-sigmoid", round=8), conv(cout, 1), bn]}


def fork_cases():
    yield "Inception-like module (GoogLeNet 3a widths, torchvision layout)", [192, 28, 28], [
        inception(64, 96, 128, 16, 32, 32), {"pool": "max", "kernel": 3, "stride": 2, "ceil": True}]
    yield "fire modules (SqueezeNet 1.0 fire2, fire3)", [96, 27, 27], fire(16, 64, 64) + fire(16, 64, 64) + [
        {"pool": "max", "kernel": 3, "stride": 2, "ceil": True}]
    yield "ShuffleNet V2 stage (stride-2 unit, 3 split units)", [24, 28, 28], shuffle_down(24, 116) + [
        {"block": 3, "layers": shuffle_unit()}]
    yield "ConvNeXt-like stage with downsampling", [48, 14, 14], [convnext_block(2), {"norm": "layer", "eps": 1e-6},
                                                                  {"conv": 96, "kernel": 2, "stride": 2}, convnext_block(1, 0.2)]
    yield "EfficientNet-like MBConv stage (gate relative to the block)", [24, 16, 16], [mbconv(2, 40, 5, 2, 0.1)]
    yield "MobileNetV3-like stage (gate width rounded to 8)", [24, 16, 16], [
        mobilenet3(1, 40, 5, 2, "x3"), mobilenet3(2, 40, 5, 1, "x3")]
    yield "fork with an empty branch (dense-style growth)", [16, 12, 12], [
        fork("copy", [], [BN, RELU, conv(12, 3, 1, 1)]), fork("copy", [], [BN, RELU, conv(12, 3, 1, 1)]), BN]
    yield "split fork into four, one branch empty", [16, 10, 10], [
        fork("split", [conv("x2", 1)], [], [conv("x1", 3, 1, 1), RELU], [{"pool": "avg", "kernel": 3, "stride": 1, "pad": 1}])]
    yield "nested fork inside a branch", [12, 14, 14], [conv(24, 1), fork("copy",
        [conv(8, 1)], [conv(16, 1), RELU, fork("split", [conv("x1", 3, 1, 1)], [conv("/2", 1), conv(4, 3, 1, 1)])], [])]
    yield "forks nested three deep", [8, 9, 9], [fork("copy", [fork("split", [fork("copy", [], [conv("x1", 1)])], [conv(6, 1)])], [conv(5, 3, 1, 1)])]
    yield "fork in a residual block (identity shortcut)", [32, 12, 12], [res(2, [
        fork("copy", bconv(8, 1), bconv(8, 1) + bconv(16, 3, 1, 1)), conv(32, 1), BN])]
    yield "strided fork in a residual block (projection shortcut)", [16, 15, 15], [res(2, [
        fork("copy", [conv(16, 3, 2, 1), BN], [{"pool": "max", "kernel": 3, "stride": 2, "pad": 1}, conv(16, 1), BN]), RELU, conv(32, 3, 1, 1), BN])]
    yield "fork in a residual block with stochastic depth", [16, 10, 10], [res(3, [
        fork("split", [conv("x1", 3, 1, 1), BN, RELU], [conv("x1", 1), BN, RELU]), conv("x1", 3, 1, 1), BN], **{"drop-path": 0.2})]
    yield "named branches merged later", [8, 12, 12], [
        fork("copy", {"name": "left", "layers": [conv(8, 3, 1, 1), RELU]}, {"name": "right", "layers": []}, name="both"),
        conv(8, 1), {"concat": "left"}, {"add": "both"}, {"concat": "right"}]
    yield "gate inside a branch", [16, 10, 10], [fork("copy", [conv(16, 3, 1, 1), RELU, se_rel("/4")], [conv(8, 1)])]
    yield "forks in a densely linked block", [12, 8, 8], [{"block": 3, "dense-links": True, "layers": [
        BN, RELU, fork("copy", [conv(6, 1)], [conv(6, 3, 1, 1)])]}]
    yield "relative widths in a densely linked block (each repeat wider)", [8, 8, 8], [{"block": 3, "dense-links": True, "layers": [
        BN, RELU, conv("x2", 1), BN, RELU, conv("/2", 3, 1, 1)]}]
    yield "block in a branch, relative to the block and to the branch", [12, 10, 10], [fork("split",
        [{"block": 2, "layers": [conv("x2", 1), RELU, dict(conv("/2", 1), **{"relative-to": "block"})]}],
        [dict(conv("x1.5", 1), **{"relative-to": "block"}), conv("x0.5", 1)])]
    yield "relative widths at the top level (the stack input)", [6, 9, 9], [conv("x2", 3, 1, 1), conv("x1.5", 1), conv("/2", 1),
                                                                          dict(conv("x1.25", 1), round=8), dict(conv("x0.5", 1), round=4)]
    yield "x-factors round half to even", [10, 6, 6], [{"block": 1, "layers": [conv("x0.25", 1), conv("x0.45", 1), conv("x0.35", 1), conv("x0.15", 1)]}]
    yield "relative widths with round 8 (10% rule)", [18, 6, 6], [conv("x1", 1), dict(conv("x1", 1), round=8), dict(conv("/2", 1), round=8),
                                                                dict(conv("x3.3", 1), round=8), dict(conv("/3", 1), round=16)]
    yield "relative deconvolution and dense layers", [8, 7, 7], [{"deconv": "x2", "kernel": 2, "stride": 2}, {"global-pool": "avg"},
                                                               {"dense": "x4"}, {"dense": "/2", "bias": False}]
    yield "per-position dense layers on a map", [12, 9, 11], [{"dense": 20, "per-position": True}, {"act": "gelu"},
                                                              {"dense": 12, "per-position": True, "bias": False}, {"norm": "layer", "eps": 1e-6},
                                                              {"global-pool": "avg"}, {"dense": 5, "per-position": True}]
    # What autograd keeps for a per-position dense layer depends on the
    # map's memory layout: nn.Linear on an N×C×H×W map's permuted view keeps
    # a contiguous copy of its input, but the view itself where the map is
    # already channels-last (a per-position dense layer's output, and what
    # convolutions and element-wise layers make of it).
    pp = {"dense": 8, "per-position": True}
    yield "per-position dense after an activation that keeps its output", [8, 6, 6], [conv(8, 1), RELU, pp]
    yield "two per-position dense layers on one map", [8, 6, 6], [conv(8, 1), fork("copy", [pp], [dict(pp, dense=4)])]
    yield "per-position dense on a split share beside a convolution", [8, 6, 6], [conv(8, 1), fork("split", [pp], [conv(4, 1)])]
    yield "per-position dense on a split share beside an empty branch", [8, 6, 6], [conv(8, 1), fork("split", [pp], [])]
    yield "per-position dense after a per-position dense, through a convolution", [8, 6, 6], [conv(8, 1), pp, RELU, conv(8, 1), RELU, pp]
    yield "per-position dense on a split share of a per-position dense's output", [8, 6, 6], [conv(8, 1), pp, fork("split", [pp], [conv(4, 1)])]
    yield "norms with eps", [8, 10, 10], [{"norm": "batch", "eps": 1e-3}, {"norm": "group", "groups": 2, "eps": 1e-6},
                                          conv(8, 3, 1, 1), {"norm": "instance", "eps": 0.01, "affine": True}, {"norm": "layer", "eps": 1e-6, "affine": False}]
    yield "fork with one branch", [8, 8, 8], [fork("copy", [conv(8, 3, 1, 1), RELU])]
    yield "forks with shuffles and gates in a residual stage", [24, 12, 12], [{"block": 2, "residual": True, "drop-path": 0.1, "after": "relu", "layers": [
        fork("split", [conv("x1", 1), BN], [dict(conv("x1", 3, 1, 1), groups="depthwise"), BN, se_rel("/2")], [conv("x1", 1), RELU]),
        {"shuffle": 3}, conv("x1", 1, bias=True)]}]
    yield "error: split fork whose channels do not divide", [8, 10, 10], [conv(10, 1), fork("split", [conv(4, 1)], [RELU], [conv("x1", 1), BN])]
    yield "error: split into more branches than channels", [2, 6, 6], [fork("split", [], [], [conv(4, 1)])]
    yield "error: split that does not divide, after a block", [4, 6, 6], [conv(6, 1), fork("split", [res(2, basic(8, 1))], [{"block": 2, "dense-links": True, "layers": [conv(2, 1)]}],
                                                                          [se_rel("/1"), fork("copy", [conv(2, 1)], [])], [{"gate": "channel", "layers": [{"global-pool": "avg"}]}])]
    yield "error: branches that end at different sizes", [8, 12, 12], [fork("copy", [conv(8, 3, 1, 1)], [conv(8, 3)])]
    yield "error: an empty branch beside a strided one", [8, 12, 12], [conv(8, 1), fork("copy", [], [conv(8, 3, 2, 1)]), conv(8, 1)]
    yield "error: a fork without branches", [8, 6, 6], [conv(8, 1), fork("copy"), conv(8, 1)]
    yield "error: a relative width that rounds to nothing", [4, 6, 6], [conv(8, 1), fork("split", [conv(4, 1)], [conv("/8", 1)])]
    yield "error: a plain dense layer inside a branch", [8, 6, 6], [fork("copy", [conv(4, 1)], [{"dense": "x1"}])]
    yield "error: relative depthwise width that the groups do not divide", [6, 6, 6], [dict(conv("x1.5", 3, 1, 1), groups="depthwise")]


# torchvision modules that hand-written cases above reproduce: (case, the
# module, the path of the case's row where the module ends).
def torchvision_modules():
    from functools import partial
    from importlib import import_module
    # The modules, not the model functions torchvision.models exports under the same names.
    convnext, efficientnet, googlenet, mobilenetv3, shufflenetv2, squeezenet = (
        import_module("torchvision.models." + m) for m in ("convnext", "efficientnet", "googlenet", "mobilenetv3", "shufflenetv2", "squeezenet"))
    mb = efficientnet.MBConvConfig
    v3 = mobilenetv3.InvertedResidualConfig
    bn3 = partial(nn.BatchNorm2d, eps=0.001, momentum=0.01)
    yield "Inception-like module (GoogLeNet 3a widths, torchvision layout)", googlenet.Inception(192, 64, 96, 128, 16, 32, 32), "1.join"
    yield "fire modules (SqueezeNet 1.0 fire2, fire3)", nn.Sequential(squeezenet.Fire(96, 16, 64, 64), squeezenet.Fire(128, 16, 64, 64)), "6.join"
    yield "ShuffleNet V2 stage (stride-2 unit, 3 split units)", nn.Sequential(
        shufflenetv2.InvertedResidual(24, 116, 2), *[shufflenetv2.InvertedResidual(116, 116, 1) for _ in range(3)]), "3.3.2"
    yield "ConvNeXt-like stage with downsampling", nn.Sequential(convnext.CNBlock(48, 1e-6, 0.1), convnext.CNBlock(48, 1e-6, 0.1)), "1.2.add"
    yield "EfficientNet-like MBConv stage (gate relative to the block)", nn.Sequential(
        efficientnet.MBConv(mb(6, 5, 2, 24, 40, 2), 0.1, bn3), efficientnet.MBConv(mb(6, 5, 1, 40, 40, 2), 0.1, bn3)), "1.2.add"
    yield "MobileNetV3-like stage (gate width rounded to 8)", nn.Sequential(
        mobilenetv3.InvertedResidual(v3(24, 5, 72, 40, True, "RE", 2, 1, 1.0), bn3),
        *[mobilenetv3.InvertedResidual(v3(40, 5, 120, 40, True, "RE", 1, 1, 1.0), bn3) for _ in range(2)]), "2.2.add"


def check_modules(cases):
    """The hand-written stacks against the torchvision modules they copy:
    the same parameters, buffers and output shape up to the module's last
    row, so the stack-file forms above mean what their names say."""
    by_name = {c["stack"]["name"]: c for c in cases}
    for name, m, last in torchvision_modules():
        case = by_name[name]
        rows = case["layers"]
        upto = next(i for i, r in enumerate(rows) if r["path"] == last) + 1
        params = sum(r["params"] for r in rows[:upto])
        buffers = sum(r["buffers"] for r in rows[:upto])
        with torch.no_grad():
            out = list(m.eval()(torch.zeros(2, *case["stack"]["input"])).shape[1:])
        want = (sum(p.numel() for p in m.parameters()), sum(b.numel() for b in m.buffers()), out)
        if (params, buffers, rows[upto - 1]["out"]) != want:
            sys.exit(f"{name}: the stack has {params} params, {buffers} buffers, output {rows[upto - 1]['out']}; "
                     f"torchvision's module {want}")


REL_WIDTHS = ["x1", "x2", "x0.5", "x1.5", "x0.75", "x3", "/2", "/3", "/4"]


def random_width(rng, in_block):
    if rng.random() < 0.5:
        return rng.choice([4, 6, 8, 12, 16, 24]), {}
    extra = {}
    if rng.random() < 0.3:
        extra["round"] = rng.choice([4, 8])
    if in_block and rng.random() < 0.3:
        extra["relative-to"] = "block"
    return rng.choice(REL_WIDTHS), extra


def random_keep(rng, in_block, depth):
    """One layer (or gate) that keeps the map size."""
    r = rng.random()
    if r < 0.3:
        w, extra = random_width(rng, in_block)
        k = rng.choice([1, 3])
        l = dict(conv(w, k, 1, k // 2, rng.random() < 0.4), **extra)
        if k == 3 and rng.random() < 0.25:
            l["groups"] = "depthwise"
            l["conv"] = rng.choice(["x1", "x2"])
            l.pop("round", None)
            l.pop("relative-to", None)
        return l
    if r < 0.45:
        l = {"norm": rng.choice(["batch", "group", "layer"])}
        if l["norm"] == "group":
            l["groups"] = rng.choice([1, 2])
        if rng.random() < 0.5:
            l["eps"] = rng.choice([1e-3, 1e-6])
        return l
    if r < 0.6:
        return {"act": rng.choice(["relu", "gelu", "silu", "hard-swish", "relu6"])}
    if r < 0.72:
        w, extra = random_width(rng, in_block)
        return dict({"dense": w, "per-position": True}, **extra)
    if r < 0.8:
        return {"shuffle": 2}
    if r < 0.86:
        return {"scale": 0.1}
    if r < 0.9:
        return {"dropout": 0.1}
    if depth < 3:
        sq = rng.choice(["/2", "/4", "x0.5"])
        kw = {"round": 8} if rng.random() < 0.3 else {}
        if in_block and rng.random() < 0.4:
            kw["relative-to"] = "block"
        return se_rel(sq, rng.choice(["relu", "silu"]), rng.choice(["sigmoid", "hard-sigmoid"]), **kw)
    return {"act": "relu"}


def random_branch(rng, s, in_block, depth, allow_empty):
    """A branch: empty, or a first layer with stride s (odd kernels padded
    by half, so every branch ends at the same size), then layers that keep
    the size, perhaps a nested fork."""
    if allow_empty and s == 1 and rng.random() < 0.25:
        return []
    k = rng.choice([1, 3, 5])
    if rng.random() < 0.25:
        first = {"pool": rng.choice(["max", "avg"]), "kernel": 3, "stride": s, "pad": 1}
    else:
        w, extra = random_width(rng, in_block)
        first = dict(conv(w, k, s, k // 2, rng.random() < 0.5), **extra)
    layers = [first]
    for _ in range(rng.randint(0, 3)):
        if depth < 3 and rng.random() < 0.12:
            layers.append(random_fork(rng, 1, in_block, depth + 1))
        else:
            layers.append(random_keep(rng, in_block, depth + 1))
    return layers


def random_fork(rng, s, in_block, depth):
    split = rng.random() < 0.4
    n = rng.choice([2, 2, 3, 4]) if split else rng.randint(1, 4)
    branches = [random_branch(rng, s, in_block, depth, True) for _ in range(n)]
    if s > 1 and rng.random() < 0.5:
        branches[-1][0] = dict(branches[-1][0], pad=0) if "conv" in branches[-1][0] else branches[-1][0]
    if rng.random() < 0.15 and branches[0]:
        branches[0] = {"name": f"b{rng.randint(0, 10**6)}", "layers": branches[0]}
    return fork("split" if split else "copy", *branches)


def random_item(rng):
    r = rng.random()
    if r < 0.35:
        return random_fork(rng, rng.choice([1, 1, 2]), False, 1)
    if r < 0.6:
        # A residual block around a fork; a projection where the shape changes.
        s = rng.choice([1, 2])
        body = [random_fork(rng, s, True, 2)] + [random_keep(rng, True, 2) for _ in range(rng.randint(0, 2))]
        d = {"block": rng.randint(1, 3), "residual": True, "layers": body}
        if rng.random() < 0.4:
            d["drop-path"] = rng.choice([0.1, 0.2])
        if rng.random() < 0.3:
            d["shortcut"] = "identity"
        if rng.random() < 0.4:
            d["after"] = "relu"
        return d
    if r < 0.72:
        body = [random_keep(rng, True, 2) for _ in range(rng.randint(1, 2))] + [random_fork(rng, 1, True, 2)]
        return {"block": rng.randint(2, 3), "dense-links": True, "layers": body}
    if r < 0.8:
        return se_rel(rng.choice(["/2", "/4", "x0.5"]), **({"round": 8} if rng.random() < 0.5 else {}))
    if r < 0.9:
        return random_keep(rng, False, 1)
    k = rng.choice([2, 3])
    return {"pool": "max", "kernel": k, "stride": 2}


def partial_run(inp, layers):
    r = Runner()
    try:
        with torch.no_grad():
            r.stack(layers, torch.zeros(1, *inp))
        return r.rows, True
    except Exception:
        return r.rows, False


def generated_forks(rng, n):
    """Random stacks of forks (copy and split, nested, with empty and named
    branches), relative widths, per-position dense layers, gates, residual
    and densely linked blocks. An item PyTorch refuses is mostly drawn
    again; now and then the case ends on it, so some cases are refused."""
    for i in range(n):
        inp = [rng.choice([8, 12, 16, 24]), rng.randint(6, 20), rng.randint(6, 20)]
        layers = [conv(rng.choice([8, 12, 16, 24]), 3, 1, 1)] if rng.random() < 0.6 else []
        for _ in range(rng.randint(2, 5)):
            for attempt in range(10):
                item = random_item(rng)
                rows, ok = partial_run(inp, layers + [item])
                # Small enough that autograd's run stays quick.
                small = len(rows) <= 300 and sum(r["out"][0] * r["out"][1] * r["out"][2] for r in rows) <= 120000
                if ok and small:
                    layers.append(item)
                    break
                if not ok and small and rng.random() < 0.15:
                    layers.append(item)
                    break
            else:
                continue
            if not ok:
                break
        yield f"generated fork {i + 1:02d}", inp, layers


def rearranging_cases():
    """A sub-pixel upsampler as Shi et al. 2016 lay it out (5×5 and 3×3
    convolutions with tanh, the last to r²·C channels at the low
    resolution, then the shuffle; r = 3, one channel), its mirror that
    moves space into channels first, and a stage of Ghost modules (Han et
    al. 2020: a 1×1 primary convolution to ⌈oup/s⌉ channels with batch norm
    and ReLU, a cheap 3×3 depthwise one on it, both joined, the first oup
    kept), written with a fork whose first branch is the map itself."""
    def ghost(oup, s, relu=True):
        init = -(-oup // s)
        act = [{"act": "relu"}] if relu else []
        cheap = [{"conv": init * (s - 1), "kernel": 3, "pad": 1, "groups": "depthwise", "bias": False},
                 {"norm": "batch"}] + act
        return [{"conv": init, "kernel": 1, "bias": False}, {"norm": "batch"}] + act + \
            [{"fork": "copy", "branches": [[], cheap]}, {"keep": oup}]
    yield "sub-pixel upsampler r3", [1, 17, 17], [
        {"conv": 64, "kernel": 5, "pad": 2}, {"act": "tanh"},
        {"conv": 32, "kernel": 3, "pad": 1}, {"act": "tanh"},
        {"conv": 9, "kernel": 3, "pad": 1}, {"to-space": 3}]
    yield "space to channels first", [3, 24, 20], [
        {"to-channels": 2}, {"conv": 16, "kernel": 3, "pad": 1}, {"norm": "batch"}, {"act": "relu"},
        {"conv": 48, "kernel": 3, "pad": 1}, {"to-space": 2}, {"keep": 5}, {"conv": 4, "kernel": 1}]
    yield "ghost modules", [16, 20, 20], ghost(16, 2) + ghost(16, 3) + ghost(24, 3, relu=False) + \
        [{"block": 1, "residual": True, "layers": ghost(13, 4) + ghost(24, 3, relu=False)}]


def activation_cases():
    """Each new activation where what autograd keeps shows: after a
    convolution (which keeps its input) and before one (which keeps the
    activation's output), so keeping the input or the output counts
    differently; a residual block with each after its addition; PReLU with
    one shared slope and one per channel (He et al. 2015, section 2.1)."""
    for a in ({"act": "mish"}, {"act": "softmax"}, {"act": "prelu"}, {"act": "prelu", "per-channel": True, "slope": 0.1}):
        yield "between convolutions: " + " ".join(str(v) for v in a.values()), [3, 12, 10], [
            {"conv": 8, "kernel": 3, "pad": 1}, a, {"conv": 4, "kernel": 1}, a]
    for a in ("mish", "softmax", "prelu"):
        yield "residual then " + a, [8, 9, 9], [
            {"block": 2, "residual": True, "after": a, "layers": [
                {"conv": 8, "kernel": 3, "pad": 1, "bias": False}, {"norm": "batch"}, {"act": a},
                {"conv": 8, "kernel": 3, "pad": 1, "bias": False}, {"norm": "batch"}]}]


def generated_spatial_gates(rng, n):
    """Random stacks with spatial gates (kernels 1 to 9, an even one now and
    then, which stackfit and the module above refuse; bias off, batch norm
    on), among the other single kinds and inside residual blocks, drawn
    with their own generator so the older cases stay as they were."""
    for i in range(n):
        inp = [rng.choice([1, 3, 8, 16]), rng.randint(1, 24), rng.randint(1, 24)]
        layers = [conv(rng.choice([8, 16]), 3, 1, 1)] if rng.random() < 0.6 else []
        x = torch.zeros(1, *inp)
        for j in range(rng.randint(2, 6)):
            kind = "spatial-gate" if j % 2 == 0 else rng.choice(KINDS[:SINGLE])
            if kind in ("dense", "reshape", "flatten"):
                continue
            layer = random_layer(rng, x.shape[1], kind)
            if kind == "spatial-gate" and rng.random() < 0.3 and x.shape[2] > 1:
                c = x.shape[1]
                layer = {"block": rng.randint(1, 2), "residual": True, "after": "relu",
                         "layers": [conv(c, 3, 1, 1), BN, RELU, conv(c, 3, 1, 1), BN, layer]}
            layers.append(layer)
            try:
                r = Runner()
                with torch.no_grad():
                    x = r.stack(layers, torch.zeros(1, *inp))
                if min(x.shape[1:]) < 1:
                    break
            except Exception:
                break  # the case ends on the layer PyTorch refuses
        yield f"generated spatial gate {i + 1:02d}", inp, layers


def check_forms():
    """The script's own forms against PyTorch's: the shuffle equals
    nn.ChannelShuffle, the hard activations their definitions (Howard et al.
    2019: x·relu6(x + 3)/6 and relu6(x + 3)/6)."""
    x = torch.randn(2, 12, 3, 5)
    for g in (1, 2, 3, 4, 6):
        if not torch.equal(ChannelShuffle(g)(x), nn.ChannelShuffle(g)(x)):
            sys.exit(f"ChannelShuffle({g}) differs from nn.ChannelShuffle")
    r6 = torch.clamp(x + 3, 0, 6) / 6
    if not (torch.allclose(nn.Hardswish()(x), x * r6) and torch.allclose(nn.Hardsigmoid()(x), r6)):
        sys.exit("hard-swish or hard-sigmoid differs from its definition")
    # nn.PixelShuffle's channel order, c·r² + i·r + j for output channel c
    # at offset (i, j) of each r×r block (the order the engine's explain
    # line states, and the one PyTorch's documentation gives through its
    # shapes); Shi et al. 2016's periodic shuffling orders the r² offsets
    # with c fastest (from memory), a fixed permutation of the last
    # convolution's filters that changes no count. nn.PixelUnshuffle
    # undoes it.
    r, c = 3, 2
    t = torch.randn(1, c * r * r, 4, 5)
    y = nn.PixelShuffle(r)(t)
    for ch in range(c):
        for i in range(r):
            for j in range(r):
                if not torch.equal(y[0, ch, i::r, j::r], t[0, ch * r * r + i * r + j]):
                    sys.exit("nn.PixelShuffle's channel order differs from c·r² + i·r + j")
    if not torch.equal(nn.PixelUnshuffle(r)(y), t):
        sys.exit("nn.PixelUnshuffle does not undo nn.PixelShuffle")


def main():
    check_forms()
    torch.manual_seed(0)
    rng = random.Random(SEED)
    frng = random.Random(SEED + 1)  # its own draws: the older cases stay as they were
    cases = []
    every = list(published()) + list(generated(rng, GENERATED)) + list(block_cases(rng))
    every += list(fork_cases()) + list(generated_forks(frng, GENERATED_FORKS))
    every += list(published_files())
    # Cases of their own, so that the cases above stay as they were.
    every += list(rearranging_cases())
    every += list(generated(random.Random(SEED + 2), GENERATED_REARRANGING, KINDS[:SINGLE] + REARRANGING, REARRANGING, "rearranged"))
    every += list(activation_cases())
    every += list(generated(random.Random(SEED + 3), GENERATED_ACTIVATING, KINDS[:SINGLE] + ACTIVATING, ACTIVATING, "activated"))
    every += list(generated_spatial_gates(random.Random(SEED + 4), GENERATED_SPATIAL_GATES))
    for name, inp, layers in every:
        stack = {"stackfit": 1, "name": name, "input": inp, "layers": layers}
        rows, error_at, message = run(stack)
        case = {"stack": stack, "layers": rows, "error_at": error_at, "torch_error": message}
        if error_at is None:
            case["saved_per_sample"] = saved_per_sample(stack)
        cases.append(case)
    seen = {k: 0 for k in KINDS}
    features = {f: 0 for f in FEATURES}

    def count(layers, inside):
        for layer in layers:
            k = kind_of(layer)
            seen[k] += 1
            if not isinstance(layer, dict):
                continue
            for key in WIDTHS:
                if isinstance(layer.get(key), str):
                    features["relative x-factor" if layer[key].startswith("x") else "relative divisor"] += 1
            for key, f in (("round", "round"), ("relative-to", "relative-to block"), ("per-position", "per-position dense"), ("eps", "norm eps")):
                if key in layer:
                    features[f] += 1
            if k == "fork":
                features["fork " + layer["fork"]] += 1
                if "fork" in inside:
                    features["fork in a branch"] += 1
                if any(b.get("residual") for b in inside if isinstance(b, dict)):
                    features["fork in a residual block"] += 1
                for b in layer["branches"]:
                    if isinstance(b, dict) and "name" in b:
                        features["named branch"] += 1
                    if not branch_layers(b):
                        features["empty branch"] += 1
                    count(branch_layers(b), inside + ["fork"])
            elif "layers" in layer:
                count(layer["layers"], inside + [layer])
    for case in cases:
        count(case["stack"]["layers"], [])
    missing = [k for k, n in seen.items() if n == 0] + [f for f, n in features.items() if n == 0]
    if missing:
        sys.exit(f"kinds or forms never generated: {missing}")
    check_modules(cases)
    doc = {
        "about": "Per-layer output shapes, parameters and buffer elements from PyTorch "
                 + torch.__version__ + "; regenerate with /usr/bin/python3 testdata/reference/torch_reference.py",
        "cases": cases,
    }
    with open(os.path.join(HERE, "shapes.json"), "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    refused = sum(1 for c in cases if c["error_at"] is not None)
    print(f"{len(cases)} stacks, {sum(len(c['layers']) for c in cases)} layers, {refused} refused by PyTorch; kinds: {seen}; forms: {features}")


if __name__ == "__main__":
    main()
