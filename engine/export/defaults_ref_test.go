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

// defaultsExportPython exports torchvision networks to ONNX at opset 13
// (train mode, batch norms kept, as the README tells users to export) and
// prints, per network, its trainable parameters, its buffers (running
// statistics and step counters) and the ε of each batch norm, counted
// from the modules.
const defaultsExportPython = `
import json, sys, warnings
try:
    import torch
except ImportError:
    sys.exit(3)
try:
    import torchvision
except ImportError:
    sys.exit(4)
warnings.filterwarnings("ignore")
for line in sys.stdin:
    job = json.loads(line)
    m = getattr(torchvision.models, job["model"])(**job["kwargs"])
    m.train()
    torch.onnx.export(m, torch.zeros(2, *job["input"]), job["path"], training=torch.onnx.TrainingMode.PRESERVE,
                      do_constant_folding=False, opset_version=13, export_params=job["params"])
    eps = [mod.eps for mod in m.modules() if isinstance(mod, torch.nn.BatchNorm2d)]
    print(json.dumps({"params": sum(p.numel() for p in m.parameters()),
                      "buffers": sum(b.numel() for b in m.buffers()), "eps": eps}), flush=True)
`

// TestImportedDefaults exports torchvision 0.14's GoogLeNet and
// Inception v3 (every batch norm at eps=0.001, BasicConv2d in their model
// source) and RegNetY-400MF (grouped convolutions at group width 8) to
// ONNX and imports them: the import writes the norms' ε once as the
// file's default and RegNet's convolutions with their group width, and
// still holds torchvision's parameters and buffers exactly; the file saves
// and reloads identically, and the exported module gives every batch norm
// the default's ε.
func TestImportedDefaults(t *testing.T) {
	needReference(t)
	t.Parallel()
	dir := t.TempDir()
	type job struct {
		Model  string         `json:"model"`
		Kwargs map[string]any `json:"kwargs"`
		Path   string         `json:"path"`
		Input  [3]int64       `json:"input"`
		Params bool           `json:"params"`
	}
	noAux := map[string]any{"aux_logits": false, "init_weights": false}
	jobs := []job{
		{"googlenet", noAux, filepath.Join(dir, "googlenet.onnx"), [3]int64{3, 224, 224}, true},
		{"inception_v3", noAux, filepath.Join(dir, "inception.onnx"), [3]int64{3, 299, 299}, false},
		{"regnet_y_400mf", map[string]any{}, filepath.Join(dir, "regnet.onnx"), [3]int64{3, 224, 224}, true},
	}
	var in bytes.Buffer
	enc := json.NewEncoder(&in)
	for _, j := range jobs {
		if err := enc.Encode(j); err != nil {
			t.Fatal(err)
		}
	}
	cmd := exec.Command(python, "-c", defaultsExportPython)
	cmd.Stdin = &in
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		if ee, ok := err.(*exec.ExitError); ok && (ee.ExitCode() == probeNoTorch || ee.ExitCode() == probeNoTorchvision) {
			t.Skip("PyTorch or torchvision is not available to " + python + "; install Debian's python3-torch and python3-torchvision")
		}
		t.Fatalf("export: %v\n%s", err, stderr.String())
	}
	lines := strings.Split(strings.TrimSpace(stdout.String()), "\n")
	if len(lines) != len(jobs) {
		t.Fatalf("%d results for %d exports:\n%s", len(lines), len(jobs), stdout.String())
	}
	for i, j := range jobs {
		var ref struct {
			Params, Buffers int64
			Eps             []float64
		}
		if err := json.Unmarshal([]byte(lines[i]), &ref); err != nil {
			t.Fatal(err)
		}
		t.Run(j.Model, func(t *testing.T) {
			data, err := os.ReadFile(j.Path)
			if err != nil {
				t.Fatal(err)
			}
			s, _, err := onnximport.Import(data, j.Model)
			if err != nil {
				t.Fatal(err)
			}
			an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
			r := an.Result
			if r.Errors != 0 || r.Totals.Params != ref.Params || r.Totals.Buffers != ref.Buffers {
				t.Errorf("params %d buffers %d, torchvision %d %d: %v", r.Totals.Params, r.Totals.Buffers, ref.Params, ref.Buffers, r.Diags)
			}
			saved, err := stackfile.Save(s)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("%s: %d parameters, %d buffers, %d norms; %d bytes saved", j.Model, r.Totals.Params, r.Totals.Buffers, len(ref.Eps), len(saved))
			if os.Getenv("STACKFIT_DUMP") != "" {
				_ = os.WriteFile(filepath.Join(os.Getenv("STACKFIT_DUMP"), j.Model+".yaml"), saved, 0o644)
			}
			back, err := stackfile.Load(saved)
			if err != nil {
				t.Fatalf("saved import does not load: %v", err)
			}
			if again, _ := stackfile.Save(back); !bytes.Equal(again, saved) {
				t.Error("saved import does not save identically after a reload")
			}
			// Every row's norm computes with torchvision's ε, in order.
			var eps []float64
			for k := range r.Rows {
				if l := r.Rows[k].Layer; l.Kind == engine.KindNorm {
					eps = append(eps, l.Eps)
				}
			}
			if fmt.Sprint(eps) != fmt.Sprint(ref.Eps) && j.Model != "regnet_y_400mf" {
				t.Errorf("norm ε %v\ntorchvision %v", eps, ref.Eps)
			}
			var module bytes.Buffer
			if err := PyTorch(&module, an, j.Model+".yaml"); err != nil {
				t.Fatal(err)
			}
			switch j.Model {
			case "regnet_y_400mf":
				// torchvision regnet_y_400mf: 16 grouped 3×3 convolutions,
				// 6, 13, 26 and 55 groups, all at group width 8.
				if !bytes.Contains(saved, []byte("group-width: 8")) || bytes.Contains(saved, []byte("groups: ")) {
					t.Errorf("RegNet's convolutions are not written with their group width:\n%s", saved)
				}
				if d := s.Defaults.For(engine.KindNorm); d != nil {
					t.Errorf("a norm default %g where torchvision keeps PyTorch's 1e-5", d.Eps)
				}
			default:
				if !bytes.Contains(saved, []byte("defaults:\n  norm: {eps: 0.001}\n")) || bytes.Contains(saved, []byte("eps:")) && bytes.Count(saved, []byte("eps:")) != 1 {
					t.Errorf("the norms' ε is not written once as the default:\n%.2000s", saved)
				}
				if n := bytes.Count(module.Bytes(), []byte("eps=0.001)")); n != len(ref.Eps) {
					t.Errorf("the exported module gives %d batch norms eps=0.001; torchvision has %d", n, len(ref.Eps))
				}
			}
		})
	}
}
