package onnximport

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
	"stackfit/engine/stackfile"
)

// exportUnitNets exports torchvision networks to ONNX (opset 13, train
// mode with the batch norms kept and no constant folding, as README tells
// users to export; without the weights' values, which the import does not
// read) into the folder given, and prints each net's parameter and buffer
// counts as PyTorch counts them, one JSON line per net.
const exportUnitNets = `
import json, sys, warnings
import torch, torchvision
warnings.filterwarnings("ignore")
from torchvision import models
# EfficientNet exports in eval mode: its stochastic depth draws with
# Bernoulli in training, which the exporter cannot write at opset 13; the
# batch norms stay nodes of their own all the same (PRESERVE, no folding).
nets = [
    ("inception_v3", lambda: models.inception_v3(aux_logits=False, init_weights=False), 299, True),
    ("googlenet", lambda: models.googlenet(aux_logits=False, init_weights=False), 224, True),
    ("resnet18", models.resnet18, 224, True),
    ("resnet50", models.resnet50, 224, True),
    ("mobilenet_v2", models.mobilenet_v2, 224, True),
    ("densenet121", models.densenet121, 224, True),
    ("efficientnet_b0", models.efficientnet_b0, 224, False),
    ("regnet_y_400mf", models.regnet_y_400mf, 224, True),
]
for name, build, size, train in nets:
    m = build()
    m.train(train)
    torch.onnx.export(m, torch.zeros(2, 3, size, size), sys.argv[1] + "/" + name + ".onnx",
                      training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False,
                      opset_version=13, export_params=False)
    print(json.dumps({"name": name, "params": sum(p.numel() for p in m.parameters()),
                      "buffers": sum(b.numel() for b in m.buffers())}), flush=True)
`

// TestImportUnitsTorchvision exports torchvision's Inception v3 (299×299,
// no auxiliary classifier), GoogLeNet, ResNet-18 and -50, MobileNetV2,
// DenseNet-121, EfficientNet-B0 and RegNetY-400MF with Debian's PyTorch and imports each: the stack holds
// exactly PyTorch's parameters and buffers (batch norm's running mean,
// variance and batch counter: torch.nn.Module.buffers), saves and loads
// back to the same file and rows, and the networks that repeat
// convolution–norm–activation runs and modules come out short: Inception
// v3 in at most 120 lines (252 written out), GoogLeNet in at most 60 (218)
// with its nine inception modules as uses of one unit; and the stages
// that differ only in widths, strides, kernels and repeats are uses of one
// unit holding the stage's block: ResNet-50's layer1…layer4 (He et al.
// 2016, Table 1: 3, 4, 6 and 3 bottlenecks; at most 35 lines),
// EfficientNet-B0's five MBConv stages with squeeze-and-excitation from
// stage 2 to 6 (Tan & Le 2019, Table 1; at most 80 lines), RegNetY-400MF's.
func TestImportUnitsTorchvision(t *testing.T) {
	needReference(t, "torch", "torchvision")
	dir := t.TempDir()
	out, err := exec.Command(python, "-c", exportUnitNets, dir).Output()
	if err != nil {
		t.Fatalf("export: %v", err)
	}
	maxLines := map[string]int{"inception_v3": 120, "googlenet": 60, "resnet50": 35, "efficientnet_b0": 80}
	stages := map[string]int{"resnet50": 4, "efficientnet_b0": 5, "regnet_y_400mf": 3} // uses of a unit that holds one block
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		var n struct {
			Name            string
			Params, Buffers int64
		}
		if err := json.Unmarshal([]byte(line), &n); err != nil {
			t.Fatalf("%q: %v", line, err)
		}
		data, err := os.ReadFile(filepath.Join(dir, n.Name+".onnx"))
		if err != nil {
			t.Fatal(err)
		}
		s, _, err := Import(data, n.Name)
		if err != nil {
			t.Errorf("%s: %v", n.Name, err)
			continue
		}
		r := engine.Evaluate(s)
		if r.Errors > 0 || r.Totals.Params != n.Params || r.Totals.Buffers != n.Buffers {
			t.Errorf("%s: %d parameters, %d buffers; PyTorch counts %d and %d", n.Name, r.Totals.Params, r.Totals.Buffers, n.Params, n.Buffers)
		}
		file, err := stackfile.Save(s)
		if err != nil {
			t.Fatalf("%s: %v", n.Name, err)
		}
		back, err := stackfile.Load(file)
		if err != nil {
			t.Fatalf("%s: %v", n.Name, err)
		}
		again, _ := stackfile.Save(back)
		if !bytes.Equal(again, file) || fmt.Sprint(leafRows(back)) != fmt.Sprint(leafRows(s)) {
			t.Errorf("%s: does not load back the same", n.Name)
		}
		lines := bytes.Count(file, []byte("\n"))
		t.Logf("%s: %d lines, %d units", n.Name, lines, len(s.Units))
		if limit, ok := maxLines[n.Name]; ok && (lines > limit || len(s.Units) == 0) {
			t.Errorf("%s: %d lines, %d units; want at most %d lines with units\n%s", n.Name, lines, len(s.Units), limit, file)
		}
		// merged top-level modules are named after the first and the last
		if n.Name == "inception_v3" && !bytes.Contains(file, []byte("repeat: 2, name: Mixed_5c-d}")) {
			t.Errorf("inception_v3: Mixed_5c and Mixed_5d are not one use named Mixed_5c-d\n%s", file)
		}
		if want, ok := stages[n.Name]; ok {
			got := 0
			for _, l := range s.Layers {
				if u := s.UnitByName(l.Unit); u != nil && len(u.Body) == 1 && u.Body[0].Kind == engine.KindBlock {
					got++
				}
			}
			if got < want {
				t.Errorf("%s: %d stages written as uses of a stage unit, want %d\n%s", n.Name, got, want, file)
			}
		}
	}
	if n := bytes.Count(out, []byte("\n")); n != 8 {
		t.Errorf("%d nets exported, want 8", n)
	}
}
