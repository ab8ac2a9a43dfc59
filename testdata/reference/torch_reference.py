#!/usr/bin/env python3
"""Reference shapes and counts for stackfit's engine, computed by PyTorch.

Builds every reference stack as torch.nn layers, runs a dummy input through
them one layer at a time, and records per layer the output shape, the number
of trainable parameters and the number of buffer elements; for every stack
PyTorch runs whole, also the bytes autograd keeps for the backward pass per
sample in fp32 (saved_tensors_hooks, each storage once, batch 4 minus batch
2 halved, so weights cancel). Writes
shapes.json beside this script; engine/reference_test.go compares the engine
to it exactly.

Run with Debian's python3-torch:  /usr/bin/python3 testdata/reference/torch_reference.py

Stacks are written in stackfit's stack-file schema (as JSON, which the YAML
loader reads), so the Go test loads exactly what PyTorch built.
"""
import json
import os
import random
import sys

import torch
import torch.nn as nn
import torch.nn.functional as F

HERE = os.path.dirname(os.path.abspath(__file__))
BATCH = 2
SEED = 20261202
GENERATED = 60


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

    def __init__(self, c, affine):
        super().__init__()
        self.norm = nn.LayerNorm(c, elementwise_affine=affine)

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


def build(layer, c):
    """Returns the torch module for one stack-file layer on c input channels."""
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
        if kind == "batch":
            return nn.BatchNorm2d(c, affine=layer.get("affine", True))
        if kind == "group":
            return nn.GroupNorm(layer["groups"], c, affine=layer.get("affine", True))
        if kind == "instance":
            return nn.InstanceNorm2d(c, affine=layer.get("affine", False))
        return ChannelLayerNorm(c, layer.get("affine", True))
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
        }[layer["act"]]
    if layer == "scale" or "scale" in layer:
        return ChannelScale(c, 1.0 if layer == "scale" else layer["scale"])
    if "shuffle" in layer:
        return ChannelShuffle(layer["shuffle"])
    if "dropout" in layer:
        return nn.Dropout(layer["dropout"])
    if layer == "flatten":
        return Flatten()
    if "dense" in layer:
        return Dense(c, layer["dense"], layer.get("bias", True))
    if "reshape" in layer:
        return Reshape(tuple(layer["reshape"]))
    raise ValueError(f"unknown layer {layer}")


STRIDED = ("conv", "deconv", "pool")


def kind_of(layer):
    return layer if isinstance(layer, str) else next(iter(layer))  # "flatten", "scale"


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
            else:
                x = self.one(layer, path, x, unstrided)
            if isinstance(layer, dict) and "name" in layer:
                self.taps[layer["name"]] = x
        return x

    def one(self, layer, path, x, unstrided):
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
        m = self.mode(build(layer, x.shape[1]))
        y = m(x)
        self.row(path, y, m)
        return y

    def gate(self, layer, path, x, unstrided):
        """A channel gate: its layers compute a C×1×1 gate from the map, which
        then multiplies the map (squeeze-and-excitation, Hu et al. 2018)."""
        gp = path + ["1"]
        g = self.items(layer["layers"], gp, x, unstrided)
        if tuple(g.shape[1:]) != (x.shape[1], 1, 1):
            raise ValueError("a channel gate must end in C×1×1")
        y = x * g
        self.row(gp + ["mul"], y, None)
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
            x = self.items(layer["layers"], rp, x, un)
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
                # The repeat's total stride, from the strides written in its body.
                sh = sw = 1
                for b in layer["layers"]:
                    k = kind_of(b)
                    if k in ("conv", "pool") and not un:
                        st = pair(b.get("stride", b["kernel"] if k == "pool" else 1))
                        sh, sw = sh * st[0], sw * st[1]
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
        Runner(train=True).items(stack["layers"], [], torch.zeros(batch, *stack["input"]), False)
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
            r.items(stack["layers"], [], x, False)
    except Exception as e:  # PyTorch's refusal is the reference verdict
        bad = len(r.rows)
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


# ---- generated stacks: every kind, odd sizes, some PyTorch must refuse ----

def maybe_pair(rng, lo, hi):
    a = rng.randint(lo, hi)
    return a if rng.random() < 0.6 else [a, rng.randint(lo, hi)]


def random_layer(rng, c, kind):
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
    if kind == "shuffle":
        fits = [g for g in range(2, 9) if c % g == 0]
        misfits = [g for g in range(2, 9) if c % g]
        if misfits and (not fits or rng.random() < 0.2):
            return {"shuffle": rng.choice(misfits)}  # PyTorch refuses it
        return {"shuffle": rng.choice(fits or [1])}
    raise ValueError(kind)


KINDS = ["conv", "deconv", "pool", "global-pool", "pool-to", "upsample", "norm", "act",
         "dropout", "flatten", "dense", "reshape", "scale", "shuffle", "block", "concat", "add", "gate"]
SINGLE = 14  # KINDS[:SINGLE] are the kinds random_layer writes


def generated(rng, n):
    for i in range(n):
        c, h, w = rng.choice([1, 3, 4, 6, 8, 16]), rng.randint(5, 67), rng.randint(5, 67)
        layers = []
        x = torch.zeros(1, c, h, w)
        # The first layers of each case favour one kind in turn, so every kind appears.
        focus = KINDS[i % SINGLE]
        for j in range(rng.randint(4, 12)):
            kind = focus if j in (1, 3) else rng.choice(KINDS[:SINGLE])
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
                layer = random_layer(rng, x.shape[1], kind)
            layers.append(layer)
            try:
                m = build(layer, x.shape[1]).eval()
                with torch.no_grad():
                    x = m(torch.cat([x, x]))[:1]
                if min(x.shape[1:]) < 1:
                    break
            except Exception:
                break  # the case ends on the layer PyTorch refuses
        yield f"generated {i + 1:02d} ({focus})", [c, h, w], layers


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


def main():
    check_forms()
    torch.manual_seed(0)
    rng = random.Random(SEED)
    cases = []
    for name, inp, layers in list(published()) + list(generated(rng, GENERATED)) + list(block_cases(rng)):
        stack = {"stackfit": 1, "name": name, "input": inp, "layers": layers}
        rows, error_at, message = run(stack)
        case = {"stack": stack, "layers": rows, "error_at": error_at, "torch_error": message}
        if error_at is None:
            case["saved_per_sample"] = saved_per_sample(stack)
        cases.append(case)
    seen = {k: 0 for k in KINDS}

    def count(layers):
        for layer in layers:
            seen[kind_of(layer)] += 1
            if isinstance(layer, dict) and "layers" in layer:
                count(layer["layers"])
    for case in cases:
        count(case["stack"]["layers"])
    missing = [k for k, n in seen.items() if n == 0]
    if missing:
        sys.exit(f"kinds never generated: {missing}")
    doc = {
        "about": "Per-layer output shapes, parameters and buffer elements from PyTorch "
                 + torch.__version__ + "; regenerate with /usr/bin/python3 testdata/reference/torch_reference.py",
        "cases": cases,
    }
    with open(os.path.join(HERE, "shapes.json"), "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    refused = sum(1 for c in cases if c["error_at"] is not None)
    print(f"{len(cases)} stacks, {sum(len(c['layers']) for c in cases)} layers, {refused} refused by PyTorch; kinds: {seen}")


if __name__ == "__main__":
    main()
