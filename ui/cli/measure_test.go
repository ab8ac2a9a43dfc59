package cli

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/ui/store"
)

const python = "/usr/bin/python3"

// referenceEnv turns on the reference suite: the checks that start
// Python (Debian's python3-torch, python3-torchvision, python3-onnx). The
// README's test command leaves them out to stay fast; .ci/run sets it.
const referenceEnv = "STACKFIT_REFERENCE"

// needReference skips a check that starts Python unless the reference
// suite was asked for.
func needReference(t *testing.T) {
	t.Helper()
	if os.Getenv(referenceEnv) != "1" {
		t.Skip("reference suite (starts PyTorch): run with " + referenceEnv + "=1, as .ci/run does")
	}
}

// measureStack is a small stack for a quick training step on the CPU.
const measureStack = `stackfit: 1
name: cap inspector
input: [1, 32, 32]
training: {batch: 4, precision: bf16-mixed, optimizer: adamw}
layers:
  - {conv: 8, kernel: 3, pad: 1}
  - {norm: batch}
  - {act: relu}
  - {pool: max, kernel: 2}
  - {conv: 16, kernel: 3, pad: 1}
  - {act: relu}
  - {global-pool: avg}
  - {dense: 2}
`

// TestMeasureAndCalibrate exports a stack, checks that the module's
// estimate table gives the engine's own figures for several settings, runs
// its measuring entry point on the CPU (a few real training steps with
// Debian's python3-torch; the CUDA path is the same code behind one
// branch, run when a GPU is present) — without flags it measures the
// file's training settings, which its flags override — and feeds the
// output to stackfit calibrate, which must write the workspace and
// overhead into the file, rounded up to what a person reads.
func TestMeasureAndCalibrate(t *testing.T) {
	needReference(t)
	if err := exec.Command(python, "-c", "import torch").Run(); err != nil {
		t.Skip("PyTorch is not installed (apt-get install python3-torch); .ci/run installs it")
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "cap.yaml")
	if err := os.WriteFile(file, []byte(measureStack), 0o644); err != nil {
		t.Fatal(err)
	}
	mod := filepath.Join(dir, "cap.py")
	if code := Run([]string{"export", file, "-o", mod}, IO{Out: new(strings.Builder), Err: new(strings.Builder)}); code != ExitOK {
		t.Fatalf("export: exit %d", code)
	}
	// The estimate table against the engine.
	s, err := store.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	r := engine.Evaluate(s)
	// One process: the estimate table for three settings, whether CUDA is
	// present, then the measuring entry point itself on the CPU (and on
	// CUDA when present), as python cap.py --measure runs it.
	probe := `import contextlib, importlib.util, io, json, sys, torch
spec = importlib.util.spec_from_file_location("cap", sys.argv[1]); m = importlib.util.module_from_spec(spec); spec.loader.exec_module(m)
print(json.dumps([m._estimate(b, p, o) for b, p, o in [(4, "fp32", "sgd"), (16, "bf16-mixed", "adamw"), (3, "fp16-master", "momentum")]]))
print(json.dumps(torch.cuda.is_available()))
buf = io.StringIO()
with contextlib.redirect_stdout(buf):
    m.main(["--measure", "--batch", "2", "--precision", "fp32", "--optimizer", "sgd", "--device", "cpu"])
print(json.dumps(buf.getvalue()))
for dev in ["cpu"] + (["cuda"] if torch.cuda.is_available() else []):
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        m.main(["--measure", "--device", dev])
    print(json.dumps(buf.getvalue()))`
	out, err := exec.Command(python, "-c", probe, mod).CombinedOutput()
	if err != nil {
		t.Fatalf("probe: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	var got []map[string]int64
	var cuda bool
	var override string
	if len(lines) < 4 || json.Unmarshal([]byte(lines[0]), &got) != nil || json.Unmarshal([]byte(lines[1]), &cuda) != nil ||
		json.Unmarshal([]byte(lines[2]), &override) != nil {
		t.Fatalf("probe output:\n%s", out)
	}
	if !strings.Contains(override, ", batch 2, fp32, sgd\n") {
		t.Errorf("the flags did not override the file's settings:\n%s", override)
	}
	for i, tr := range []engine.Training{{Batch: 4}, {Batch: 16, Precision: engine.BF16Mixed, Optimizer: engine.AdamW}, {Batch: 3, Precision: engine.FP16Master, Optimizer: engine.Momentum}} {
		var m engine.Memory
		r.Memory(tr, engine.DefaultAssumptions(), &m)
		want := map[string]int64{"weights": m.Weights, "gradients": m.Gradients, "optimizer": m.Optimizer,
			"activations": m.Activations, "workspace": m.Workspace, "overhead": m.Overhead}
		for k, v := range want {
			if got[i][k] != v {
				t.Errorf("%+v: the module estimates %s %d, the engine %d", tr, k, got[i][k], v)
			}
		}
	}
	if !cuda {
		t.Log("no CUDA device here: the CUDA measurement is not run")
	}
	for i, dev := range []string{"cpu", "cuda"}[:len(lines)-3] {
		var meas string
		if err := json.Unmarshal([]byte(lines[3+i]), &meas); err != nil {
			t.Fatalf("%s measurement: %v", dev, err)
		}
		// Without flags: the file's batch, precision and optimizer.
		for _, want := range []string{"stackfit measure: ", ", batch 4, bf16-mixed, adamw\n", "activations", "measured peak (allocated)", calibrationPrefix + " device="} {
			if !strings.Contains(meas, want) {
				t.Errorf("%s measurement lacks %q:\n%s", dev, want, meas)
			}
		}
		var o, e strings.Builder
		args := []string{"calibrate", file}
		if dev == "cpu" {
			if code := Run(args, IO{In: strings.NewReader(meas), Out: &o, Err: &e}); code != ExitUsage || !strings.Contains(e.String(), "--cpu") {
				t.Errorf("a CPU measurement was taken without --cpu: exit %d, %s", code, e.String())
			}
			args = append(args, "--cpu")
		}
		o.Reset()
		e.Reset()
		if code := Run(args, IO{In: strings.NewReader(meas), Out: &o, Err: &e}); code != ExitOK {
			t.Fatalf("calibrate: exit %d: %s", code, e.String())
		}
		c, err := readCalibration(strings.NewReader(meas))
		if err != nil {
			t.Fatal(err)
		}
		s, err := store.LoadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		ws, oh := engine.CeilBytes(c.workspace), engine.CeilBytes(c.overhead)
		if s.Training.Workspace != ws || s.Training.Overhead != oh || s.Training.Batch != 4 {
			t.Errorf("calibrated training %+v, want workspace %d overhead %d (the measured %d and %d rounded up)", s.Training, ws, oh, c.workspace, c.overhead)
		}
	}
}

// TestReadCalibration checks the calibration line's reading.
func TestReadCalibration(t *testing.T) {
	for _, tt := range []struct {
		in, err string
	}{
		{"x\nstackfit-calibration: device=NVIDIA_H100 workspace=100 overhead=200\n", ""},
		{"nothing here\n", "no \"stackfit-calibration:\" or \"stackfit-probe:\" line"},
		{"stackfit-probe: device=cpu class=conv precision=fp32 batch=1 flops=1e9 bytes=1e6 seconds=0.1\n", ""},
		{"stackfit-probe: device=cpu class=bogus precision=fp32 flops=1 bytes=1 seconds=1\n", "names no class"},
		{"stackfit-probe: device=Unknown_Card class=conv precision=fp32 flops=1 bytes=1 seconds=1\n", "table lacks"},
		{"stackfit-calibration: device=cpu workspace=-1 overhead=2\n", "expected a byte count"},
		{"stackfit-calibration: workspace=1\n", "lacks device"},
	} {
		_, err := readCalibration(strings.NewReader(tt.in))
		if (err == nil) != (tt.err == "") || err != nil && !strings.Contains(err.Error(), tt.err) {
			t.Errorf("%q: %v, want %q", tt.in, err, tt.err)
		}
	}
}
