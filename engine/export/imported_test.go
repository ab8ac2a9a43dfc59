package export

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport"
	"stackfit/engine/stackfile"
)

// onnxExportPython exports reference networks to ONNX with Debian's
// PyTorch, one JSON job per line on its standard input ({"model",
// "path", "opset", "input", "params", "eval"}): train mode with the batch
// norms kept (TrainingMode.PRESERVE, no constant folding), the way the
// README tells users to export, or eval mode with constant folding (the
// batch norms folded into the convolutions). torchvision's stochastic
// depth is put in eval mode first: the exporter has no training form of
// its random drop at these opsets (Bernoulli).
const onnxExportPython = `
import json, sys
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
import warnings
warnings.filterwarnings("ignore")
for line in sys.stdin:
    job = json.loads(line)
    m = reference(job["model"])
    if job.get("eval"):
        m.eval()
        mode, fold = torch.onnx.TrainingMode.EVAL, True
    else:
        m.train()
        for sub in m.modules():
            if isinstance(sub, torchvision.ops.StochasticDepth):
                sub.eval()
        mode, fold = torch.onnx.TrainingMode.PRESERVE, False
    torch.onnx.export(m, torch.zeros(2, *job["input"]), job["path"], training=mode, do_constant_folding=fold,
                      opset_version=job["opset"], export_params=job["params"])
    print(job["path"], flush=True)
`

// importNets are the networks exported to ONNX and imported: every
// published stack torchvision builds, three more torchvision families with
// no published file (RegNet's builder cannot run on the probe's meta
// device, so it is left out) (their documented num_params, which the probe checks
// against torchvision's weights metadata), the DCGAN discriminator and a
// U-Net (held to the reference module alone).
func importNets() []tvNet {
	nets := append([]tvNet(nil), torchvisionNets...)
	return append(nets,
		tvNet{file: "shufflenet-v2-x1-0", model: "shufflenet_v2_x1_0", params: 2278604, outputs: true}, // torchvision shufflenet_v2_x1_0: 2,278,604 params
		tvNet{file: "mnasnet1-0", model: "mnasnet1_0", params: 4383312},                                // torchvision mnasnet1_0: 4,383,312 params
		tvNet{file: "mobilenet-v3-large", model: "mobilenet_v3_large", params: 5483032},                // torchvision mobilenet_v3_large: 5,483,032 params
		tvNet{file: "unet", model: "unet", outputs: true})
}

// unpublished gives the input of a net with no published stack file.
var unpublished = map[string]engine.Shape{
	"shufflenet-v2-x1-0": {C: 3, H: 224, W: 224}, "mnasnet1-0": {C: 3, H: 224, W: 224},
	"mobilenet-v3-large": {C: 3, H: 224, W: 224},
	"unet":               {C: 3, H: 64, W: 64},
}

// opsets are the operator sets a network is exported at: 13 for all, and
// 17 too for those whose export changes between them (layer norm, hard
// swish and sigmoid, SiLU, the forks, concatenations and gates) and one
// plain residual net. The plain chains and residual stacks of
// convolutions, batch norms, ReLUs, pools and dense layers (the VGGs,
// AlexNet, the larger ResNets) export to the same operators at both; at
// 17 they added two minutes to the suite for no other check.
func opsets(n tvNet) []int {
	switch {
	case strings.HasPrefix(n.file, "vgg"), n.file == "alexnet", strings.HasPrefix(n.file, "resnet") && n.file != "resnet18", strings.HasPrefix(n.file, "wide"):
		return []int{13}
	}
	return []int{13, 17}
}

// TestImportedMatchTorchvision exports every network of importNets to ONNX
// at opset 13, and the ones opsets names at 17 as well, with Debian's PyTorch, imports each with stackfit,
// and holds the imported stack to the reference exactly as a published
// stack is held (matchTorchvision): parameters, buffers and MACs, the
// output, every convolution and dense layer's kind, shape, parameters and
// MACs in order, and for the nets marked outputs the imported stack's
// exported module given the reference's weights computes the same outputs.
// The stacks are checked at the exported input only: a traced export
// fixes sizes an adaptive pooling would adapt. Nets over 30 million
// parameters (the VGGs, AlexNet, the larger ResNets) are exported without
// their weights (export_params=False: the weights become graph inputs),
// which keeps the files small and the suite a minute shorter; the
// opset-17 exports all are, which the import must read too (in opsets, the larger nets are exported at 13 only). An eval-mode export of ResNet-18 must import with the note that the
// batch norms look folded.
func TestImportedMatchTorchvision(t *testing.T) {
	needReference(t)
	t.Parallel()
	dir := t.TempDir()
	type job struct {
		Model  string   `json:"model"`
		Path   string   `json:"path"`
		Opset  int      `json:"opset"`
		Input  [3]int64 `json:"input"`
		Params bool     `json:"params"`
		Eval   bool     `json:"eval,omitempty"`
	}
	var jobs []job
	inputs := map[string]engine.Shape{}
	for _, n := range importNets() {
		in, ok := unpublished[n.file]
		if !ok {
			data, err := os.ReadFile(filepath.Join("..", "..", "testdata", "published", n.file+".yaml"))
			if err != nil {
				t.Fatal(err)
			}
			s, err := stackfile.Load(data)
			if err != nil {
				t.Fatal(err)
			}
			in = s.Input
		}
		inputs[n.file] = in
		for _, opset := range opsets(n) {
			jobs = append(jobs, job{Model: n.model, Path: filepath.Join(dir, fmt.Sprintf("%s-%d.onnx", n.file, opset)), Opset: opset,
				Input: [3]int64{in.C, in.H, in.W}, Params: opset == 13 && n.params < 30_000_000})
		}
	}
	jobs = append(jobs, job{Model: "resnet18", Path: filepath.Join(dir, "resnet18-eval.onnx"), Opset: 17, Input: [3]int64{3, 224, 224}, Params: true, Eval: true})
	var in bytes.Buffer
	enc := json.NewEncoder(&in)
	for _, j := range jobs {
		if err := enc.Encode(j); err != nil {
			t.Fatal(err)
		}
	}
	cmd := exec.Command(python, "-c", onnxExportPython)
	cmd.Stdin = &in
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Run(); err != nil {
		if ee, ok := err.(*exec.ExitError); ok && (ee.ExitCode() == probeNoTorch || ee.ExitCode() == probeNoTorchvision) {
			t.Skip("PyTorch or torchvision is not available to " + python + "; install Debian's python3-torch and python3-torchvision")
		}
		t.Fatalf("export: %v\n%s", err, stderr.String())
	}

	var checks []tvCheck
	for _, n := range importNets() {
		for _, opset := range opsets(n) {
			name := fmt.Sprintf("%s-%d", n.file, opset)
			data, err := os.ReadFile(filepath.Join(dir, name+".onnx"))
			if err != nil {
				t.Fatal(err)
			}
			s, res, err := onnximport.Import(data, name)
			if err != nil {
				t.Errorf("%s: %v", name, err)
				continue
			}
			if s.Input != inputs[n.file] {
				t.Errorf("%s: input %v, exported at %v", name, s.Input, inputs[n.file])
			}
			t.Logf("%s: %d top-level items from %d nodes", name, len(s.Layers), res.Nodes)
			checks = append(checks, tvCheck{net: n, name: name, stack: s})
		}
	}
	data, err := os.ReadFile(filepath.Join(dir, "resnet18-eval.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	if _, res, err := onnximport.Import(data, "resnet18-eval"); err != nil || !strings.Contains(strings.Join(res.Notes, " "), "folded") {
		t.Errorf("eval-mode export: %v; notes %v; want a note that the batch norms look folded", err, res)
	}
	matchTorchvision(t, checks)
}
