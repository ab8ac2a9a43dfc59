#!/usr/bin/env python3
"""Reference networks for stackfit's activations prelu, mish and softmax,
built in PyTorch from their papers, for
engine/export/paper_activations_test.go.

Reads one JSON job per line on standard input ({"name", "model", "input",
"export", "onnx_dir"}) and prints one JSON line per job with the
reference's trainable parameters and buffer elements, the bytes autograd
keeps per sample in fp32 (saved_tensors_hooks, each storage once, batch 4
minus batch 2 halved, so weights cancel: the method of
testdata/reference/torch_reference.py), the output shape of every step of
its forward pass in order (each convolution, norm, activation, pooling,
flatten, linear layer and residual addition), the largest difference
between its output and the exported module's given the same state, and
the ONNX files it wrote at opsets 13 and 17 (training mode with the batch
norms kept, no constant folding).

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
    """Records the output shape of every step a reference's forward runs;
    N×F is recorded as the stack writes it, F×1×1."""

    def __init__(self):
        self.rows = None

    def __call__(self, op, y):
        if self.rows is not None:
            out = list(y.shape[1:])
            self.rows.append({"op": op, "out": out + [1, 1] if len(out) == 1 else out})
        return y


class PReLUNet(nn.Module):
    """He et al. 2015 ("Delving Deep into Rectifiers"), section 2.1, eq. 1:
    f(y_i) = max(0, y_i) + a_i·min(0, y_i), a_i learned per channel
    (channel-wise, nn.PReLU(C)) or one per layer (channel-shared,
    nn.PReLU(1)), starting at 0.25. The layout of
    testdata/papers/prelu-net.yaml: three 3×3 convolutions (32, 64 with
    stride 2, 64), each with batch norm and PReLU (channel-wise,
    channel-shared, channel-wise starting at 0.1), an average over the
    map and a linear classifier to 10."""

    def __init__(self, tape):
        super().__init__()
        self.tape = tape
        self.conv1 = nn.Conv2d(3, 32, 3, padding=1, bias=False)
        self.bn1 = nn.BatchNorm2d(32)
        self.prelu1 = nn.PReLU(32)
        self.conv2 = nn.Conv2d(32, 64, 3, stride=2, padding=1, bias=False)
        self.bn2 = nn.BatchNorm2d(64)
        self.prelu2 = nn.PReLU()
        self.conv3 = nn.Conv2d(64, 64, 3, padding=1, bias=False)
        self.bn3 = nn.BatchNorm2d(64)
        self.prelu3 = nn.PReLU(64, init=0.1)
        self.fc = nn.Linear(64, 10)

    def forward(self, x):
        t = self.tape
        x = t("act", self.prelu1(t("norm", self.bn1(t("conv", self.conv1(x))))))
        x = t("act", self.prelu2(t("norm", self.bn2(t("conv", self.conv2(x))))))
        x = t("act", self.prelu3(t("norm", self.bn3(t("conv", self.conv3(x))))))
        x = t("global-pool", x.mean((2, 3), keepdim=True))
        x = t("flatten", torch.flatten(x, 1))
        return t("dense", self.fc(x))


class MishBlock(nn.Module):
    """A basic residual block (He et al. 2016) with Mish (Misra 2019, eq. 1:
    x·tanh(softplus(x))) in place of ReLU: 3×3 convolution, batch norm,
    Mish, 3×3 convolution, batch norm, the input added, Mish."""

    def __init__(self, tape, c):
        super().__init__()
        self.tape = tape
        self.conv1 = nn.Conv2d(c, c, 3, padding=1, bias=False)
        self.bn1 = nn.BatchNorm2d(c)
        self.mish1 = nn.Mish()
        self.conv2 = nn.Conv2d(c, c, 3, padding=1, bias=False)
        self.bn2 = nn.BatchNorm2d(c)
        self.mish2 = nn.Mish()

    def forward(self, x):
        t = self.tape
        y = t("act", self.mish1(t("norm", self.bn1(t("conv", self.conv1(x))))))
        y = t("norm", self.bn2(t("conv", self.conv2(y))))
        return t("act", self.mish2(t("add", y + x)))


class MishNet(nn.Module):
    """The layout of testdata/papers/mish-net.yaml: a 3×3 convolution to 16
    channels, batch norm and Mish, two residual blocks with Mish, then a
    1×1 convolution to 5 classes and a softmax over the channels at each
    position (nn.Softmax(dim=1))."""

    def __init__(self, tape):
        super().__init__()
        self.tape = tape
        self.conv = nn.Conv2d(3, 16, 3, padding=1, bias=False)
        self.bn = nn.BatchNorm2d(16)
        self.mish = nn.Mish()
        self.blocks = nn.Sequential(MishBlock(tape, 16), MishBlock(tape, 16))
        self.head = nn.Conv2d(16, 5, 1)
        self.softmax = nn.Softmax(dim=1)

    def forward(self, x):
        t = self.tape
        x = t("act", self.mish(t("norm", self.bn(t("conv", self.conv(x))))))
        x = self.blocks(x)
        return t("act", self.softmax(t("conv", self.head(x))))


MODELS = {"prelu": PReLUNet, "mish": MishNet}


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
    if want.dim() == 2:
        want = want[:, :, None, None]  # the stack's N×F×1×1
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
