package cli

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/ui/store"
)

// onnxExport builds an exported module with Debian's python3-torch and
// writes its ONNX graph as torch.onnx.export does with the batch norms
// kept (training=PRESERVE, no constant folding, opset 13).
// One process exports every module given, in pairs of paths (module,
// graph): PyTorch's start-up is paid once.
const onnxExport = `import importlib.util, sys, torch
args = sys.argv[1:]
for mod, graph in zip(args[::2], args[1::2]):
    spec = importlib.util.spec_from_file_location("m", mod); m = importlib.util.module_from_spec(spec); spec.loader.exec_module(m)
    model = m.MODEL().train()
    torch.onnx.export(model, torch.zeros(2, *m.INPUT_SHAPE), graph, training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False, opset_version=13)
`

// TestImportRoundTrip: published chains (LeNet-5, the DCGAN
// discriminator and generator) go stack → PyTorch module (stackfit's
// export) → ONNX (PyTorch's exporter) → stack (stackfit import). The
// imported stack must have the same parameters, buffers, MACs and output
// as the published file, and every convolution and dense layer the same
// output shape, in order.
func TestImportRoundTrip(t *testing.T) {
	if err := exec.Command(python, "-c", "import torch").Run(); err != nil {
		t.Skip("PyTorch is not installed (apt-get install python3-torch); .ci/run installs it")
	}
	dir := t.TempDir()
	names := []string{"lenet5", "dcgan-discriminator", "dcgan-generator"}
	src := func(name string) string { return filepath.Join("..", "..", "testdata", "published", name+".yaml") }
	args := []string{"-c", onnxExport}
	for _, name := range names {
		mod := filepath.Join(dir, name+".py")
		if code := Run([]string{"export", src(name), "-o", mod}, IO{Out: new(strings.Builder), Err: new(strings.Builder)}); code != ExitOK {
			t.Fatalf("%s: export exit %d", name, code)
		}
		args = append(args, mod, filepath.Join(dir, name+".onnx"))
	}
	if b, err := exec.Command(python, args...).CombinedOutput(); err != nil {
		t.Fatalf("torch.onnx.export: %v\n%s", err, b)
	}
	for _, name := range names {
		src, graph, out := src(name), filepath.Join(dir, name+".onnx"), filepath.Join(dir, name+".yaml")
		var e strings.Builder
		if code := Run([]string{"import", graph, "-o", out}, IO{Out: new(strings.Builder), Err: &e}); code != ExitOK {
			t.Fatalf("%s: import exit %d: %s", name, code, e.String())
		}
		want, err := store.LoadFile(src)
		if err != nil {
			t.Fatal(err)
		}
		got, err := store.LoadFile(out)
		if err != nil {
			t.Fatalf("%s: the imported file does not load: %v", name, err)
		}
		rw, rg := engine.Evaluate(want), engine.Evaluate(got)
		if rg.Errors != 0 || rg.Totals != rw.Totals || rg.Output != rw.Output || got.Input != want.Input {
			t.Errorf("%s: imported %+v → %v, published %+v → %v", name, rg.Totals, rg.Output, rw.Totals, rw.Output)
		}
		shapes := func(r *engine.Result) []engine.Shape {
			var out []engine.Shape
			for i := range r.Rows {
				if r.Rows[i].Layer.Kind.HasWeights() {
					out = append(out, r.Rows[i].Out)
				}
			}
			return out
		}
		a, b := shapes(rw), shapes(rg)
		if len(a) != len(b) {
			t.Errorf("%s: %d weighted layers imported, %d published", name, len(b), len(a))
			continue
		}
		for i := range a {
			if a[i] != b[i] {
				t.Errorf("%s: weighted layer %d gives %v, published %v", name, i+1, b[i], a[i])
			}
		}
	}
}
