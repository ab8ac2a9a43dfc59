#!/usr/bin/env python3
"""A spatial gate in residual blocks, written in PyTorch from the paper.

Woo et al. 2018, "CBAM: Convolutional Block Attention Module": the
spatial attention module (section 3, Figure 2, equation 3) pools the map
along the channels by average and by maximum, concatenates the two maps,
convolves them with a 7×7 filter to one map and applies a sigmoid; the
result multiplies the input at every position. Figure 3 puts the module
at the end of a residual block's branch, before the addition. The blocks
here are He et al. 2016's basic blocks (two 3×3 convolutions with batch
norm, a projection shortcut of a strided 1×1 convolution and batch norm
where the shape changes). The first stage uses the paper's figure (the
convolution with a bias, no norm), the second the authors' code (no
bias, a batch norm before the sigmoid; from memory).

testdata/papers/spatial-gate-residual.yaml is the same network as a stack
file; engine/export/paper_spatialgate_test.go compares the two. Jobs come
as JSON lines on standard input, one answer line each:

  {"op": "reference"}: every row's path, output shape, parameters and
      buffers (stackfit's row order), the totals, and the bytes autograd
      keeps for backward per sample in fp32 (saved_tensors_hooks, each
      storage once, batch 4 minus batch 2 halved, so weights cancel).
  {"op": "equal", "module": PATH}: the exported module given this
      network's weights (state_dict entries paired in order, shapes held
      equal) computes the same outputs, in eval and in train mode.
  {"op": "onnx", "path": PATH, "opset": N}: this network exported to
      ONNX in train mode with the batch norms kept.

Run with Debian's python3-torch (1.13) as /usr/bin/python3.
"""
import importlib.util
import json
import sys
import warnings

try:
    import torch
    import torch.nn as nn
except ImportError:
    sys.exit(3)

INPUT = (16, 24, 24)


class SpatialAttention(nn.Module):
    """Woo et al. 2018, eq. 3: M_s(F) = σ(f^{7×7}([AvgPool(F); MaxPool(F)])),
    the poolings along the channel axis; F is then scaled by M_s(F)."""

    def __init__(self, bias=True, norm=False):
        super().__init__()
        self.conv = nn.Conv2d(2, 1, 7, padding=3, bias=bias)
        self.bn = nn.BatchNorm2d(1) if norm else None

    def forward(self, f, rec, path):
        avg = torch.mean(f, 1, keepdim=True)
        mx = torch.max(f, 1, keepdim=True)[0]
        m = self.conv(torch.cat([avg, mx], 1))
        if self.bn is not None:
            m = self.bn(m)
        y = f * torch.sigmoid(m)
        rec(path, y, self)
        return y


class BasicBlock(nn.Module):
    """He et al. 2016, Figure 2 left, with the spatial attention at the end
    of the residual branch (Woo et al. 2018, Figure 3)."""

    def __init__(self, cin, cout, stride, gate_bias, gate_norm):
        super().__init__()
        self.conv1 = nn.Conv2d(cin, cout, 3, stride, 1, bias=False)
        self.bn1 = nn.BatchNorm2d(cout)
        self.conv2 = nn.Conv2d(cout, cout, 3, 1, 1, bias=False)
        self.bn2 = nn.BatchNorm2d(cout)
        self.sa = SpatialAttention(gate_bias, gate_norm)
        self.down = None
        if stride != 1 or cin != cout:
            self.down = nn.Sequential(nn.Conv2d(cin, cout, 1, stride, bias=False), nn.BatchNorm2d(cout))

    def forward(self, x, rec, p):
        y = self.conv1(x)
        rec(p + ".1", y, self.conv1)
        y = self.bn1(y)
        rec(p + ".2", y, self.bn1)
        y = torch.relu(y)
        rec(p + ".3", y, None)
        y = self.conv2(y)
        rec(p + ".4", y, self.conv2)
        y = self.bn2(y)
        rec(p + ".5", y, self.bn2)
        y = self.sa(y, rec, p + ".6")
        sc = x
        if self.down is not None:
            sc = self.down[0](x)
            rec(p + ".s1", sc, self.down[0])
            sc = self.down[1](sc)
            rec(p + ".s2", sc, self.down[1])
        y = y + sc
        rec(p + ".add", y, None)
        y = torch.relu(y)
        rec(p + ".act", y, None)
        return y


class Net(nn.Module):
    def __init__(self):
        super().__init__()
        self.conv = nn.Conv2d(16, 32, 3, 1, 1, bias=False)
        self.bn = nn.BatchNorm2d(32)
        self.stage1 = nn.ModuleList([BasicBlock(32, 32, 1, True, False), BasicBlock(32, 32, 1, True, False)])
        self.stage2 = nn.ModuleList([BasicBlock(32, 64, 2, False, True), BasicBlock(64, 64, 1, False, True)])
        self.fc = nn.Linear(64, 10)

    def forward(self, x, rec=None):
        rec = rec or (lambda *a: None)
        x = self.conv(x)
        rec("1", x, self.conv)
        x = self.bn(x)
        rec("2", x, self.bn)
        x = torch.relu(x)
        rec("3", x, None)
        for i, b in enumerate(self.stage1):
            x = b(x, rec, f"4.{i + 1}")
        for i, b in enumerate(self.stage2):
            x = b(x, rec, f"5.{i + 1}")
        x = torch.mean(x, (2, 3), keepdim=True)
        rec("6", x, None)
        x = self.fc(x.flatten(1))[:, :, None, None]
        rec("7", x, self.fc)
        return x


def rows():
    out = []

    def rec(path, y, m):
        out.append({"path": path, "out": list(y.shape[1:]),
                    "params": sum(p.numel() for p in m.parameters()) if m is not None else 0,
                    "buffers": sum(b.numel() for b in m.buffers()) if m is not None else 0})

    with torch.no_grad():
        Net().eval()(torch.zeros(2, *INPUT), rec)
    return out


def saved_bytes(batch):
    kept = {}

    def pack(t):
        st = t.storage()
        kept[st.data_ptr()] = st.nbytes()
        return t

    torch.manual_seed(0)
    net = Net().train()
    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        net(torch.randn(batch, *INPUT))
    return sum(kept.values())


def load(path):
    spec = importlib.util.spec_from_file_location("exported", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod.MODEL()


def equal(path):
    torch.manual_seed(1)
    ref, exp = Net(), load(path)
    # Running statistics that are not the initial ones, so eval mode
    # reads them.
    with torch.no_grad():
        for m in ref.modules():
            if isinstance(m, nn.BatchNorm2d):
                m.running_mean.uniform_(-0.5, 0.5)
                m.running_var.uniform_(0.5, 1.5)
    src, dst = list(ref.state_dict().values()), exp.state_dict()
    if len(src) != len(dst):
        return {"error": f"{len(src)} state entries here, {len(dst)} in the export"}
    new = {}
    for v, (k, w) in zip(src, dst.items()):
        if v.shape != w.shape:
            return {"error": f"{k}: shape {list(w.shape)} in the export, {list(v.shape)} here"}
        new[k] = v.clone()
    exp.load_state_dict(new)
    x = torch.randn(3, *INPUT)
    res = {}
    for mode in ("eval", "train"):
        with torch.no_grad():
            a = getattr(ref, mode)()(x)
            b = getattr(exp, mode)()(x)
        res[mode] = float((a - b).abs().max())
    res["scale"] = float(a.abs().max())
    return res


def main():
    warnings.filterwarnings("ignore")
    for line in sys.stdin:
        job = json.loads(line)
        op = job["op"]
        if op == "reference":
            net = Net()
            ans = {"rows": rows(), "params": sum(p.numel() for p in net.parameters()),
                   "buffers": sum(b.numel() for b in net.buffers()),
                   "saved_per_sample": (saved_bytes(4) - saved_bytes(2)) // 2}
        elif op == "equal":
            ans = equal(job["module"])
        elif op == "onnx":
            net = Net().train()
            torch.onnx.export(net, torch.zeros(2, *INPUT), job["path"], training=torch.onnx.TrainingMode.PRESERVE,
                              do_constant_folding=False, opset_version=job["opset"])
            ans = {"path": job["path"]}
        else:
            ans = {"error": f"unknown op {op}"}
        ans["op"] = op
        print(json.dumps(ans), flush=True)


if __name__ == "__main__":
    main()
