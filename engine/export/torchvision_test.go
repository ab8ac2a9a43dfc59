package export

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// probeNoTorchvision is the status the torchvision probe exits with (its
// sys.exit(4)) when torchvision cannot be imported; without PyTorch it
// exits with probeNoTorch.
const probeNoTorchvision = 4

// referencePython builds the reference networks by name: torchvision's
// builders (with the documented variants BUILDER_KWARGS names), and two
// written out here from their papers — the DCGAN discriminator (Radford et
// al. 2015) and a small U-Net (Ronneberger et al. 2015: two 3×3
// convolutions per level, max pooling down, 2×2 transposed convolutions up,
// the encoder's maps concatenated before the decoder's convolutions; with
// padding, so no crop, and two levels to keep the test fast). It expects
// torch, nn and torchvision imported.
const referencePython = `
class DCGANDiscriminator(nn.Module):
    """The reference DCGAN discriminator for 64x64 images (Radford et al.
    2015, in the layout testdata/published/dcgan-discriminator.yaml states):
    strided 4x4 convolutions (stride 2, padding 1) 64, 128, 256, 512 wide,
    batch norm from the second on, leaky ReLU 0.2, a last 4x4 convolution
    to one value and a sigmoid; no bias in the convolutions."""

    def __init__(self):
        super().__init__()
        def down(cin, cout, norm):
            return [nn.Conv2d(cin, cout, 4, stride=2, padding=1, bias=False)] + \
                ([nn.BatchNorm2d(cout)] if norm else []) + [nn.LeakyReLU(0.2)]
        self.main = nn.Sequential(
            *down(3, 64, False), *down(64, 128, True), *down(128, 256, True), *down(256, 512, True),
            nn.Conv2d(512, 1, 4, bias=False), nn.Sigmoid())

    def forward(self, x):
        return self.main(x)


` + metaPython + `

# Builder arguments where a published stack follows a builder's documented
# variant rather than its defaults: GoogLeNet's documented parameter count
# leaves out the auxiliary classifiers, which its builder adds by default
# (init_weights=False skips an initialisation the meta device makes moot,
# and its warning).
BUILDER_KWARGS = {
    "googlenet": {"aux_logits": False, "init_weights": False},
}


class UNet(nn.Module):
    def __init__(self, classes=2):
        super().__init__()
        def double(cin, cout):
            return nn.Sequential(nn.Conv2d(cin, cout, 3, padding=1, bias=False), nn.BatchNorm2d(cout), nn.ReLU(),
                                 nn.Conv2d(cout, cout, 3, padding=1, bias=False), nn.BatchNorm2d(cout), nn.ReLU())
        self.enc1, self.enc2, self.mid = double(3, 16), double(16, 32), double(32, 64)
        self.pool = nn.MaxPool2d(2)
        self.up2, self.dec2 = nn.ConvTranspose2d(64, 32, 2, stride=2), double(64, 32)
        self.up1, self.dec1 = nn.ConvTranspose2d(32, 16, 2, stride=2), double(32, 16)
        self.head = nn.Conv2d(16, classes, 1)

    def forward(self, x):
        e1 = self.enc1(x)
        e2 = self.enc2(self.pool(e1))
        m = self.mid(self.pool(e2))
        d2 = self.dec2(torch.cat([e2, self.up2(m)], 1))
        d1 = self.dec1(torch.cat([e1, self.up1(d2)], 1))
        return self.head(d1)


def reference(name):
    if name == "dcgan-discriminator":
        return DCGANDiscriminator()
    if name == "unet":
        return UNet()
    return getattr(torchvision.models, name)(**BUILDER_KWARGS.get(name, {}))


def documented_params(name):
    """num_params of the first weights enum entry torchvision ships for the
    model (the value its documentation prints), or None."""
    try:
        weights = torchvision.models.get_model_weights(name)
    except Exception:
        return None
    for w in weights:
        return w.meta.get("num_params")
    return None


`

// torchvisionProbe holds each published stack to the network torchvision
// builds (the reference library), in one process. Its stdin holds one JSON
// object per network ({"name", "model", "inputs", "export", "batch",
// "compare_input"}); for each it prints one JSON line. The reference (a
// torchvision model, or the DCGAN discriminator written out below) is
// built on PyTorch's meta device, with the builder arguments
// BUILDER_KWARGS names where a stack follows a documented variant, and
// counted there from its modules: trainable parameters, every buffer
// element (batch norm's running mean, variance and step counter), the
// number torchvision's weights metadata documents, and for each input
// shape one forward pass with hooks on every Conv2d, ConvTranspose2d and
// Linear, in the order forward runs them. With "export" set it also builds
// that exported module, copies the reference's state into it one tensor
// for one, in the order forward uses them (see post_order), and runs both
// on the CPU at "compare_input", or else the first input (see
// same_outputs). A network that fails gets an "error" line and the others
// still run.
const torchvisionProbe = `
import importlib.util, json, math, sys, traceback
try:
    import torch
    import torch.nn as nn
except ImportError:
    sys.exit(3)
try:
    import torchvision
except ImportError:
    sys.exit(4)


` + referencePython + `
WEIGHTED = (nn.Conv2d, nn.ConvTranspose2d, nn.Linear)


def census(net, shape):
    """One forward pass on the meta device at batch 1: for every Conv2d,
    ConvTranspose2d and Linear call in forward order its kind, output shape
    (batch dropped), parameters and multiply-accumulates, counted from the
    module's weight: a convolution uses each weight once per output
    position, a transposed convolution once per input position, a linear
    layer once per sample, or once per position where it runs on a
    channels-last map (ConvNeXt's N×H×W×C)."""
    seen = []

    def hook(m, inputs, out):
        w = m.weight.numel()
        if isinstance(m, nn.Conv2d):
            kind, macs = "conv", w * out.shape[2] * out.shape[3]
        elif isinstance(m, nn.ConvTranspose2d):
            x = inputs[0]
            kind, macs = "deconv", w * x.shape[2] * x.shape[3]
        else:
            kind, macs = "dense", w * math.prod(out.shape[1:-1])
        seen.append({"kind": kind, "out": list(out.shape[1:]),
                     "params": sum(p.numel() for p in m.parameters(recurse=False)),
                     "macs": macs})

    handles = [m.register_forward_hook(hook) for m in net.modules() if isinstance(m, WEIGHTED)]
    try:
        with torch.no_grad():
            net(torch.zeros(1, *shape, device="meta"))
    finally:
        for h in handles:
            h.remove()
    return seen


PERIOD = 65_537  # a prime: no weight's row is a whole number of periods


def fill(net, gen, channels):
    """Random values for every parameter and buffer, so that no two tensors
    of one shape hold the same numbers: weights uniform with variance
    2/fan_in (kaiming's, which keeps a plain stack's activations at one
    scale), norm scales in [0.5, 1.5], shifts and biases in [-0.1, 0.1], a
    step counter from 1 to 999. A weight longer than PERIOD repeats one
    random run of PERIOD values: drawing VGG's 133 million numbers one by
    one takes most of a second on two cores, and as PERIOD is prime no two
    rows of a weight are alike. Batch norm's running mean and variance then
    come from one training-mode pass over a small random batch, so that in
    eval mode it normalises (residual stacks stay at a moderate scale) with
    statistics that differ from channel to channel."""
    with torch.no_grad():
        for key, t in net.state_dict().items():
            if not t.is_floating_point():
                t.fill_(int(torch.randint(1, 1000, (1,), generator=gen)))
            elif t.dim() > 1:
                b = math.sqrt(6 / (t.numel() // t.shape[0]))
                if t.numel() <= PERIOD:
                    t.uniform_(-b, b, generator=gen)
                else:
                    run = torch.empty(PERIOD).uniform_(-b, b, generator=gen)
                    flat, whole = t.view(-1), t.numel() // PERIOD * PERIOD
                    flat[:whole].view(-1, PERIOD).copy_(run.expand(whole // PERIOD, PERIOD))
                    flat[whole:].copy_(run[:t.numel() - whole])
            elif key.endswith("weight"):
                t.uniform_(0.5, 1.5, generator=gen)
            else:
                t.uniform_(-0.1, 0.1, generator=gen)
    norms = [m for m in net.modules() if isinstance(m, nn.modules.batchnorm._BatchNorm)]
    momenta = [m.momentum for m in norms]
    for m in norms:
        m.momentum = 1.0  # the running statistics become this batch's
    net.train()
    # Stochastic depth and dropout draw their masks from PyTorch's global
    # generator in training mode (EfficientNet's dropped units change the
    # statistics of the norms after them): seeding it makes every run fill
    # the same state.
    torch.manual_seed(0)
    with torch.no_grad():
        net(torch.randn(2, channels, 64, 64, generator=gen))
    for m, momentum in zip(norms, momenta):
        m.momentum = momentum
    net.eval()


def post_order(module, prefix=""):
    """The module's state tensors (parameters, then persistent buffers) in
    post-order: every child's first, in registration order, then the
    module's own. state_dict lists a module's own tensors before its
    children's, which is forward order only while no module holds both:
    torchvision's ConvNeXt block registers its layer scale, applied after
    its body, before the body's layers, while the export's per-channel
    scale is a layer of its own after them. In post-order both sides list
    the tensors in the order forward uses them. For the other nets the
    order is state_dict's: their modules that hold tensors have no
    children."""
    for name, child in module.named_children():
        yield from post_order(child, prefix + name + ".")
    for name, p in module._parameters.items():
        if p is not None:
            yield prefix + name, p
    for name, b in module._buffers.items():
        if b is not None and name not in module._non_persistent_buffers_set:
            yield prefix + name, b


def same_outputs(tv, path, batch, shape):
    """Builds the exported module, copies the reference's state into it in
    post-order (one to one, shapes equal; see post_order) and runs both in
    eval mode on one random input on the CPU; returns the largest absolute
    difference and the reference output's largest magnitude."""
    spec = importlib.util.spec_from_file_location("exported", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    with on_meta():
        ex = mod.MODEL()
    ex = ex.to_empty(device="cpu").eval()
    tv = tv.to_empty(device="cpu").eval()
    gen = torch.Generator().manual_seed(0)
    fill(tv, gen, shape[0])
    theirs, ours = list(post_order(tv)), list(post_order(ex))
    for net, pairs in ((tv, theirs), (ex, ours)):
        if len(pairs) != len(net.state_dict()):
            raise ValueError("%d state tensors in post-order, %d in the state" % (len(pairs), len(net.state_dict())))
    if len(theirs) != len(ours):
        raise ValueError("the reference has %d state tensors, the export %d" % (len(theirs), len(ours)))
    with torch.no_grad():
        for (tk, tt), (ek, et) in zip(theirs, ours):
            if tt.shape != et.shape or tt.dtype != et.dtype:
                raise ValueError("shape mismatch: reference %s %s %s, export %s %s %s" % (
                    tk, list(tt.shape), tt.dtype, ek, list(et.shape), et.dtype))
            et.copy_(tt)
    x = torch.randn(batch, *shape, generator=gen)
    with torch.no_grad():
        want = tv(x).flatten(1)
        got = ex(x).flatten(1)
    if want.shape != got.shape:
        raise ValueError("outputs differ in shape: reference %s, export %s" % (list(want.shape), list(got.shape)))
    diff = (want - got).abs().max().item()
    scale = want.abs().max().item()
    if not (math.isfinite(diff) and math.isfinite(scale)):
        raise ValueError("outputs not finite: difference %r, scale %r" % (diff, scale))
    return {"pairs": len(theirs), "max_diff": diff, "scale": scale, "out": list(want.shape[1:])}


torch.set_num_threads(2)
for line in sys.stdin:
    case = json.loads(line)
    res = {"name": case["name"]}
    try:
        with on_meta():
            tv = reference(case["model"])
        tv = tv.to("meta").eval()
        res["params"] = sum(p.numel() for p in tv.parameters() if p.requires_grad)
        res["buffers"] = sum(b.numel() for _, b in tv.named_buffers())
        res["documented_params"] = documented_params(case["model"])
        res["runs"] = [census(tv, shape) for shape in case["inputs"]]
        if case.get("export"):
            res["compare"] = same_outputs(tv, case["export"], case["batch"], case.get("compare_input") or case["inputs"][0])
    except Exception as e:
        res["error"] = "".join(traceback.format_exception_only(type(e), e)).strip()
    print(json.dumps(res), flush=True)
`

type tvCase struct {
	Name   string     `json:"name"`
	Model  string     `json:"model"`
	Inputs [][3]int64 `json:"inputs"`
	Export string     `json:"export,omitempty"`
	Batch  int        `json:"batch,omitempty"`
	// CompareInput is the input of the output comparison where it is not
	// the stack's (see compareInputs).
	CompareInput *[3]int64 `json:"compare_input,omitempty"`
}

// tvLayer is one convolution, transposed convolution or dense layer: what
// forward ran (the probe) or what the engine's row says.
type tvLayer struct {
	Kind   string  `json:"kind"`
	Out    []int64 `json:"out"`
	Params int64   `json:"params"`
	MACs   int64   `json:"macs"`
}

type tvResult struct {
	Name             string      `json:"name"`
	Params           int64       `json:"params"`
	Buffers          int64       `json:"buffers"`
	DocumentedParams *int64      `json:"documented_params"`
	Runs             [][]tvLayer `json:"runs"`
	Compare          *struct {
		Pairs   int     `json:"pairs"`
		MaxDiff float64 `json:"max_diff"`
		Scale   float64 `json:"scale"`
		Out     []int64 `json:"out"`
	} `json:"compare"`
	Error string `json:"error"`
}

// runTorchvisionProbe runs the probe once over every case and returns its
// answers by name. It skips the test when python3, PyTorch or torchvision
// is missing.
func runTorchvisionProbe(t *testing.T, cases []tvCase) map[string]tvResult {
	t.Helper()
	return runPython(t, torchvisionProbe, cases, map[int]string{
		probeNoTorch:       "PyTorch is not available to " + python + "; install Debian's python3-torch and python3-torchvision",
		probeNoTorchvision: "torchvision is not available to " + python + "; install Debian's python3-torchvision",
	}, func(r tvResult) string { return r.Name })
}

// weightedRows lists the engine's convolution, transposed convolution and
// dense rows in row order, the projection shortcuts a residual block adds
// included (they follow the repeat's body, where torchvision's bottleneck
// runs its downsample). A dense row's 1×1 map is written as PyTorch's
// N×units output: the units alone. A per-position dense row is written as
// the nn.Linear inside it sees its output, channels last (H, W, units):
// torchvision's ConvNeXt permutes its map to N×H×W×C for its linear layers,
// and the export's PositionDense does the same.
func weightedRows(r *engine.Result) []tvLayer {
	var ls []tvLayer
	for i := range r.Rows {
		row := &r.Rows[i]
		var kind string
		switch row.Layer.Kind {
		case engine.KindConv:
			kind = "conv"
		case engine.KindDeconv:
			kind = "deconv"
		case engine.KindDense:
			kind = "dense"
		default:
			continue
		}
		out := []int64{row.Out.C, row.Out.H, row.Out.W}
		switch {
		case kind == "dense" && row.Layer.PerPosition:
			out = []int64{row.Out.H, row.Out.W, row.Out.C}
		case kind == "dense" && row.Out.H == 1 && row.Out.W == 1:
			out = out[:1]
		}
		ls = append(ls, tvLayer{Kind: kind, Out: out, Params: row.Params, MACs: row.MACs})
	}
	return ls
}

// tvNet is a network held to its reference: its published stack file,
// the reference's builder, its documented figures, and whether outputs are
// compared.
type tvNet struct {
	file    string // under testdata/published
	model   string // torchvision.models builder, or the probe's own reference
	params  int64  // documented num_params; the DCGAN discriminator's is derived below; 0: the reference's own count
	gflops  string // documented GFLOPS, "" where not quoted
	outputs bool
}

// torchvisionNets are the published stacks torchvision builds in the same
// layout, with the numbers torchvision's model documentation prints for
// them (the weights' num_params and GFLOPS on the model pages). The probe
// reads num_params from the installed library's weights metadata as well,
// and the test requires it to equal the documented value: the doc figures
// below are checked against the library on every run. torchvision 0.14's
// metadata carries no GFLOPS, so those stay the documentation's, checked
// against the engine's MACs to the printed precision. The *-paper.yaml
// ResNets follow He et al. 2016 (stride on the first 1×1), not torchvision,
// and are left out.
//
// outputs marks the nets whose export also runs against torchvision's
// module on the CPU. Filling, copying and running nine of the first
// sixteen nets took about 7 s on this project's two-core machine, so only
// a representative subset of those runs (about 1 s): the basic residual
// block (resnet18), the grouped bottleneck with its projection shortcuts
// (resnext50_32x4d; resnet50 and wide_resnet50_2 are the same layout with
// other widths), plain convolutions, AlexNet's adaptive pool and its
// classifier (alexnet), and the DCGAN discriminator's leaky ReLU and
// sigmoid; convolutions with batch norm run in nearly every net below, so
// vgg11_bn and wide_resnet50_2 (4–5 s together) are counted only. Every net with a fork, a gate, a
// relative width, dense links or a per-position dense layer runs (about
// 2.5 s together, ConvNeXt at a smaller input: see compareInputs): each is
// the only check of its kind's export against torchvision. The counts run
// for every net, on the meta device, where they cost milliseconds.
var torchvisionNets = []tvNet{
	{"resnet18", "resnet18", 11689512, "1.81", true},                // torchvision resnet18: 11,689,512 params, 1.81 GFLOPS
	{"resnet34", "resnet34", 21797672, "", false},                   // torchvision resnet34: 21,797,672 params
	{"resnet50", "resnet50", 25557032, "4.09", false},               // torchvision resnet50: 25,557,032 params, 4.09 GFLOPS
	{"resnet101", "resnet101", 44549160, "", false},                 // torchvision resnet101: 44,549,160 params
	{"resnet152", "resnet152", 60192808, "", false},                 // torchvision resnet152: 60,192,808 params
	{"resnext50-32x4d", "resnext50_32x4d", 25028904, "4.23", true},  // torchvision resnext50_32x4d: 25,028,904 params, 4.23 GFLOPS
	{"wide-resnet50-2", "wide_resnet50_2", 68883240, "11.4", false}, // torchvision wide_resnet50_2: 68,883,240 params, 11.4 GFLOPS
	{"vgg11", "vgg11", 132863336, "", false},                        // torchvision vgg11: 132,863,336 params
	{"vgg11-bn", "vgg11_bn", 132868840, "", false},                  // torchvision vgg11_bn: 132,868,840 params
	{"vgg13", "vgg13", 133047848, "", false},                        // torchvision vgg13: 133,047,848 params
	{"vgg13-bn", "vgg13_bn", 133053736, "", false},                  // torchvision vgg13_bn: 133,053,736 params
	{"vgg16", "vgg16", 138357544, "", false},                        // torchvision vgg16: 138,357,544 params
	{"vgg16-bn", "vgg16_bn", 138365992, "", false},                  // torchvision vgg16_bn: 138,365,992 params
	{"vgg19", "vgg19", 143667240, "", false},                        // torchvision vgg19: 143,667,240 params
	{"vgg19-bn", "vgg19_bn", 143678248, "", false},                  // torchvision vgg19_bn: 143,678,248 params
	{"alexnet", "alexnet", 61100840, "", true},                      // torchvision alexnet: 61,100,840 params
	{"mobilenet-v2", "mobilenet_v2", 3504872, "0.30", true},         // torchvision mobilenet_v2: 3,504,872 params, 0.30 GFLOPS
	{"mobilenet-v3-small", "mobilenet_v3_small", 2542856, "", true}, // torchvision mobilenet_v3_small weights metadata: num_params 2,542,856
	{"efficientnet-b0", "efficientnet_b0", 5288548, "0.39", true},   // torchvision efficientnet_b0: 5,288,548 params, 0.39 GFLOPS
	{"densenet121", "densenet121", 7978856, "2.83", true},           // torchvision densenet121: 7,978,856 params, 2.83 GFLOPS
	{"squeezenet1-1", "squeezenet1_1", 1235496, "", true},           // torchvision squeezenet1_1 weights metadata: num_params 1,235,496
	{"googlenet", "googlenet", 6624904, "1.50", true},               // torchvision googlenet (aux_logits=False): 6,624,904 params, 1.50 GFLOPS
	{"convnext-tiny", "convnext_tiny", 28589128, "4.46", true},      // torchvision convnext_tiny: 28,589,128 params, 4.46 GFLOPS
	// No published total: derived from Radford et al. 2015's layer list,
	// 16·(3·64 + 64·128 + 128·256 + 256·512 + 512·1) convolution weights
	// plus 2·(128 + 256 + 512) batch norm scales and shifts.
	{"dcgan-discriminator", "dcgan-discriminator", 2765568, "", true},
}

// compareInputs are the inputs of the output comparison for nets that would
// take too long to run at their own. ConvNeXt's linear layers run at every
// position, and this project's PyTorch (Debian's, on its generic BLAS)
// multiplies matrices at about 4 GFLOPS on two cores: running the
// reference and the export at 224×224 took 12 s of the test's 22 s. At
// 64×64 (stages at 16, 8, 4 and 2 positions a side; the size fill's
// training pass uses) the same tensors and operations run in about 1 s.
// The counts are still checked at 224×224 and 320×256.
var compareInputs = map[string]engine.Shape{
	"convnext-tiny": {C: 3, H: 64, W: 64},
}

// TestPublishedMatchTorchvision holds each published stack to torchvision's
// network (torchvision as the reference library; the DCGAN discriminator
// to the reference module the probe writes out from the paper), at the
// stack's own input and at 320×256, in one PyTorch process: parameters,
// buffers and MACs in total, and for every convolution and dense layer in
// forward order its kind, output shape, parameters and MACs, all exactly.
// For the nets marked outputs it then exports the stack, loads torchvision's
// state into the export tensor for tensor and requires the two outputs on
// one random input to agree within 1e-4.
func TestPublishedMatchTorchvision(t *testing.T) {
	needReference(t)
	t.Parallel()
	var checks []tvCheck
	for _, n := range torchvisionNets {
		f := filepath.Join("..", "..", "testdata", "published", n.file+".yaml")
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(data)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		checks = append(checks, tvCheck{net: n, name: n.file, stack: s, wide: true})
	}
	matchTorchvision(t, checks)
}

// tvCheck is one stack held to a reference network: name keys it (and
// its subtest), wide adds the run at 320×256.
type tvCheck struct {
	net   tvNet
	name  string
	stack *engine.Stack
	wide  bool
}

// matchTorchvision runs the reference probe over every check in one
// PyTorch process and holds each stack to its reference (see
// TestPublishedMatchTorchvision), each in a subtest named after it.
func matchTorchvision(t *testing.T, checks []tvCheck) {
	t.Helper()
	dir := t.TempDir()
	wide := engine.Shape{C: 3, H: 320, W: 256} // any size the nets take; not square, so height and width cannot swap unseen
	type want struct {
		an   *engine.Analysis
		runs []*engine.Result
	}
	wants := map[string]want{}
	var cases []tvCase
	for _, ch := range checks {
		n, s := ch.net, ch.stack
		path, an := exportFile(t, s, dir, "tv-"+ch.name)
		w := want{an: an, runs: []*engine.Result{an.Result}}
		if ch.wide {
			other := s.Clone()
			other.Input = wide
			w.runs = append(w.runs, engine.Evaluate(other))
		}
		wants[ch.name] = w
		c := tvCase{Name: ch.name, Model: n.model}
		for _, r := range w.runs {
			c.Inputs = append(c.Inputs, [3]int64{r.Input.C, r.Input.H, r.Input.W})
		}
		if n.outputs {
			c.Export, c.Batch = path, 2
			if an.Result.Totals.MACs > 5_000_000_000 {
				c.Batch = 1
			}
			if in, ok := compareInputs[n.file]; ok {
				c.CompareInput = &[3]int64{in.C, in.H, in.W}
			}
		}
		cases = append(cases, c)
	}

	got := runTorchvisionProbe(t, cases)
	for _, ch := range checks {
		n := ch.net
		t.Run(ch.name, func(t *testing.T) {
			g, ok := got[ch.name]
			if !ok {
				t.Fatal("the probe printed nothing for it")
			}
			if g.Error != "" {
				t.Fatalf("PyTorch could not build, count or compare %s: %s", n.model, g.Error)
			}
			w := wants[ch.name]
			tot := w.an.Result.Totals
			want := n.params
			if want == 0 {
				want = g.Params // no documented figure: the reference's own count
			}
			if g.Params != want || tot.Params != want {
				t.Errorf("parameters: %s counts %d, the engine %d; want %d", n.model, g.Params, tot.Params, want)
			}
			if g.DocumentedParams != nil && *g.DocumentedParams != n.params {
				t.Errorf("torchvision's weights metadata says num_params %d, the test quotes %d", *g.DocumentedParams, n.params)
			}
			if g.DocumentedParams == nil && n.model != "dcgan-discriminator" && n.model != "unet" {
				t.Errorf("torchvision documents no num_params for %s", n.model)
			}
			if g.Buffers != tot.Buffers {
				t.Errorf("buffers: %s holds %d values, the engine counts %d", n.model, g.Buffers, tot.Buffers)
			}
			if n.gflops != "" {
				if s := fmt.Sprintf("%.*f", decimals(n.gflops), float64(tot.MACs)/1e9); s != n.gflops {
					t.Errorf("%d MACs print as %s GFLOPS, torchvision documents %s", tot.MACs, s, n.gflops)
				}
			}
			if len(g.Runs) != len(w.runs) {
				t.Fatalf("the probe ran %d inputs, want %d", len(g.Runs), len(w.runs))
			}
			for i, r := range w.runs {
				in := r.Input
				if r.Errors != 0 {
					t.Errorf("at %v the stack has errors: %v", in, r.Diags)
					continue
				}
				ours, theirs := weightedRows(r), g.Runs[i]
				var macs int64
				for _, l := range theirs {
					macs += l.MACs
				}
				if macs != r.Totals.MACs {
					t.Errorf("at %v: %s's convolution and dense layers make %d MACs, the engine counts %d", in, n.model, macs, r.Totals.MACs)
				}
				if len(ours) != len(theirs) || len(ours) == 0 {
					t.Errorf("at %v: %s runs %d convolution and dense layers, the stack has %d", in, n.model, len(theirs), len(ours))
				}
				for j := range min(len(ours), len(theirs)) {
					o, th := ours[j], theirs[j]
					if o.Kind != th.Kind || !slices.Equal(o.Out, th.Out) || o.Params != th.Params || o.MACs != th.MACs {
						t.Errorf("at %v, weighted layer %d: %s has %s out %v, %d params, %d MACs; the engine %s out %v, %d params, %d MACs",
							in, j+1, n.model, th.Kind, th.Out, th.Params, th.MACs, o.Kind, o.Out, o.Params, o.MACs)
					}
				}
			}
			for _, r := range w.runs {
				t.Logf("%d params, %d buffers; MACs %d at %v", tot.Params, tot.Buffers, r.Totals.MACs, r.Input)
			}
			if !n.outputs {
				return
			}
			cmp := g.Compare
			if cmp == nil {
				t.Fatal("the probe compared no outputs")
			}
			out := w.an.Result.Output
			if o := cmp.Out; len(o) != 1 || o[0] != out.C*out.H*out.W {
				t.Errorf("output of %v values per sample, the engine's %v", cmp.Out, out)
			}
			// A one-to-one copy leaves nothing of either side out; every
			// tensor of the state is a parameter or a buffer.
			if cmp.Scale == 0 {
				t.Errorf("the reference output is all zeros: the comparison says nothing")
			}
			if cmp.MaxDiff > 1e-4 {
				t.Errorf("outputs differ by up to %g (reference outputs up to %g) after copying %d state tensors", cmp.MaxDiff, cmp.Scale, cmp.Pairs)
			}
			t.Logf("%d state tensors copied; max |difference| %g at output magnitude %g", cmp.Pairs, cmp.MaxDiff, cmp.Scale)
		})
	}
}

// decimals is the number of digits after the point in a printed number.
func decimals(s string) int {
	for i := range s {
		if s[i] == '.' {
			return len(s) - i - 1
		}
	}
	return 0
}
