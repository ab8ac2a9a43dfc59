"""Reference modules for additive forks and branches from named outputs,
written in PyTorch as the papers describe them, independently of
stackfit's export:

  resnet_d  He et al. 2019, "Bag of Tricks for Image Classification with
            Convolutional Neural Networks", Section 4, Figure 2(c): a stage
            of bottlenecks whose first block's shortcut is a 2x2 average
            pool with stride 2, a 1x1 convolution with stride 1 and batch
            norm (ResNet-D); its main path strides on the 3x3 (ResNet-B).
  fpn       Lin et al. 2017, "Feature Pyramid Networks for Object
            Detection", Section 3, Figure 3: a three-stage encoder, 1x1
            laterals, the coarser map upsampled x2 (nearest) and added, a
            3x3 convolution on the finest merged map (one output).
  res2net   Gao et al. 2019, "Res2Net: A New Multi-scale Backbone
            Architecture", Section 3.1, Figure 2: y1 = x1, y2 = K2(x2),
            yi = Ki(xi + y(i-1)), concatenated, 1x1, added to the input.

Each forward records the output shape of every step in the order
stackfit's rows come (a fork's branches in order, then the join).

  joins_reference.py measure OUT   writes OUT/measure.json (parameters,
      buffer elements, saved-for-backward bytes per sample in fp32 training
      mode, every row's shape) and OUT/NAME-OPSET.onnx for resnet_d and fpn
      at opsets 13 and 17 (training mode kept, no constant folding)
  joins_reference.py compare NAME MODULE.py   builds stackfit's exported
      module, gives it the reference's weights (state_dict entries in
      order, shapes checked) and prints the largest difference of the
      outputs in eval and in training mode

Run with Debian's python3-torch 1.13 (/usr/bin/python3).
"""
import importlib.util
import json
import sys
import warnings

import torch
import torch.nn as nn
import torch.nn.functional as F

ROWS = []


def rec(x):
    ROWS.append(list(x.shape[1:]))
    return x


def conv_bn(cin, cout, k, stride=1):
    return [nn.Conv2d(cin, cout, k, stride, k // 2, bias=False), nn.BatchNorm2d(cout), nn.ReLU()]


def run(mods, x):
    for m in mods:
        x = rec(m(x))
    return x


class Bottleneck(nn.Module):
    """He et al. 2016's bottleneck with the stride on the 3x3 (ResNet-B);
    down: ResNet-D's shortcut (He et al. 2019, Figure 2(c))."""

    def __init__(self, cin, width, stride, down):
        super().__init__()
        out = 4 * width
        self.main = nn.ModuleList([
            nn.Conv2d(cin, width, 1, bias=False), nn.BatchNorm2d(width), nn.ReLU(),
            nn.Conv2d(width, width, 3, stride, 1, bias=False), nn.BatchNorm2d(width), nn.ReLU(),
            nn.Conv2d(width, out, 1, bias=False), nn.BatchNorm2d(out)])
        self.down = None
        if down:
            self.down = nn.ModuleList([nn.AvgPool2d(2, 2), nn.Conv2d(cin, out, 1, 1, bias=False), nn.BatchNorm2d(out)])
        self.relu = nn.ReLU()

    def forward(self, x):
        y = run(self.main, x)
        sc = run(self.down, x) if self.down is not None else x
        return rec(self.relu(rec(y + sc)))


class ResNetDStage(nn.Module):
    input = (64, 32, 32)

    def __init__(self):
        super().__init__()
        self.blocks = nn.ModuleList([Bottleneck(64, 32, 2, True), Bottleneck(128, 32, 1, False), Bottleneck(128, 32, 1, False)])

    def forward(self, x):
        for b in self.blocks:
            x = b(x)
        return x


class FPNTopDown(nn.Module):
    input = (3, 64, 64)

    def __init__(self, d=32):
        super().__init__()
        self.c3 = nn.Sequential(*conv_bn(3, 16, 3, 2))
        self.c4 = nn.Sequential(*conv_bn(16, 32, 3, 2))
        self.c5 = nn.Sequential(*conv_bn(32, 64, 3, 2))
        # Laterals registered coarse to fine, the order they are used in.
        self.lat5 = nn.Conv2d(64, d, 1)
        self.lat4 = nn.Conv2d(32, d, 1)
        self.lat3 = nn.Conv2d(16, d, 1)
        self.out = nn.Conv2d(d, d, 3, padding=1)

    def forward(self, x):
        c3 = run(self.c3, x)
        c4 = run(self.c4, c3)
        c5 = run(self.c5, c4)
        p5 = rec(self.lat5(c5))
        p4 = rec(rec(F.interpolate(p5, scale_factor=2.0, mode="nearest")) + rec(self.lat4(c4)))
        p3 = rec(rec(F.interpolate(p4, scale_factor=2.0, mode="nearest")) + rec(self.lat3(c3)))
        return rec(self.out(p3))


class Res2NetUnit(nn.Module):
    input = (64, 16, 16)

    def __init__(self, cin=64, w=8, s=4):
        super().__init__()
        self.s = s
        self.head = nn.ModuleList(conv_bn(cin, w * s, 1))
        self.k = nn.ModuleList([nn.ModuleList(conv_bn(w, w, 3)) for _ in range(s - 1)])
        self.tail = nn.ModuleList([nn.Conv2d(w * s, cin, 1, bias=False), nn.BatchNorm2d(cin)])
        self.relu = nn.ReLU()

    def forward(self, x):
        xs = torch.chunk(run(self.head, x), self.s, 1)
        ys = [xs[0]]
        for i in range(1, self.s):
            inp = xs[i] if i == 1 else rec(xs[i] + ys[-1])
            ys.append(run(self.k[i - 1], inp))
        y = run(self.tail, rec(torch.cat(ys, 1)))
        return rec(self.relu(rec(y + x)))


NETS = {"resnet_d": ResNetDStage, "fpn": FPNTopDown, "res2net": Res2NetUnit}
ONNX = ("resnet_d", "fpn")


def saved_bytes(m, shape, batch):
    kept = {}

    def pack(t):
        st = t.storage()
        kept[st.data_ptr()] = st.nbytes()
        return t

    x = torch.zeros(batch, *shape)
    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        m(x)
    return sum(kept.values())


def measure(out):
    res = {}
    for name, cls in NETS.items():
        torch.manual_seed(0)
        m = cls().train()
        ROWS.clear()
        with torch.no_grad():
            m(torch.zeros(1, *cls.input))
        rows = list(ROWS)
        saved = (saved_bytes(m, cls.input, 4) - saved_bytes(m, cls.input, 2)) // 2
        res[name] = {"params": sum(p.numel() for p in m.parameters()),
                     "buffers": sum(b.numel() for b in m.buffers()),
                     "saved_per_sample": saved, "rows": rows}
        if name in ONNX:
            for opset in (13, 17):
                torch.onnx.export(m, torch.zeros(2, *cls.input), "%s/%s-%d.onnx" % (out, name, opset),
                                  training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False, opset_version=opset)
    with open(out + "/measure.json", "w") as f:
        json.dump(res, f)


def compare(name, path):
    spec = importlib.util.spec_from_file_location("exported", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    torch.manual_seed(0)
    ref = NETS[name]()
    got = mod.MODEL()
    # Running statistics away from their start, so eval mode tests them.
    with torch.no_grad():
        for t in ref.buffers():
            if t.is_floating_point():
                t.add_(0.1 * torch.rand_like(t))
    a, b = list(ref.state_dict().values()), got.state_dict()
    if len(a) != len(b):
        raise SystemExit("%d state entries, the export has %d" % (len(a), len(b)))
    new = {}
    for (k, v), w in zip(b.items(), a):
        if tuple(v.shape) != tuple(w.shape):
            raise SystemExit("entry %s: %s, the reference's %s" % (k, tuple(v.shape), tuple(w.shape)))
        new[k] = w.clone()
    got.load_state_dict(new)
    x = torch.randn(2, *ref.input)
    worst = 0.0
    for train in (False, True):
        ref.train(train)
        got.train(train)
        with torch.no_grad():
            worst = max(worst, (ref(x) - got(x)).abs().max().item())
    print(json.dumps({"max_abs_diff": worst}))


if __name__ == "__main__":
    warnings.filterwarnings("ignore")
    if sys.argv[1] == "measure":
        measure(sys.argv[2])
    else:
        compare(sys.argv[2], sys.argv[3])
