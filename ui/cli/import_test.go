package cli

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
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
	needReference(t)
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
		var o, e strings.Builder
		if code := Run([]string{"import", graph, "-o", out}, IO{Out: &o, Err: &e}); code != ExitOK {
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
		if say := fmt.Sprintf("%d rows, %s parameters, from ", len(rg.Rows), engine.GroupDigits(rg.Totals.Params)); !strings.Contains(o.String(), say) {
			t.Errorf("%s: the import says %q, want it to say %q", name, o.String(), say)
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

// tinyModel is an ONNX model of a 3×3 convolution from 3 to 4 channels on
// a 1×3×16×16 input, a 1×1 convolution, and the difference of the two
// (a join the import stops at)
// (written with stackfit's binding, whose field numbers are the format's).
func tinyModel(t *testing.T) []byte {
	t.Helper()
	dims := []*onnxpb.Dim{}
	for _, d := range []int64{1, 3, 16, 16} {
		dims = append(dims, &onnxpb.Dim{Value: &onnxpb.Dim_Size{Size: d}})
	}
	ints := func(name string, v ...int64) *onnxpb.Attribute {
		return &onnxpb.Attribute{Name: proto.String(name), Kind: proto.Int32(7), Ints: v}
	}
	g := &onnxpb.Graph{Name: proto.String("g"),
		Input: []*onnxpb.ValueInfo{{Name: proto.String("x"), Type: &onnxpb.ValueType{TensorType: &onnxpb.TensorType{ElemType: proto.Int32(1), Shape: &onnxpb.Shape{Dim: dims}}}}},
		Initializer: []*onnxpb.Weight{{Name: proto.String("w"), Dims: []int64{4, 3, 3, 3}, ElemType: proto.Int32(1)},
			{Name: proto.String("v"), Dims: []int64{4, 4, 1, 1}, ElemType: proto.Int32(1)}},
		Node: []*onnxpb.Node{
			{OpType: proto.String("Conv"), Name: proto.String("stem"), Input: []string{"x", "w"}, Output: []string{"c"},
				Attribute: []*onnxpb.Attribute{ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)}},
			{OpType: proto.String("Conv"), Name: proto.String("body"), Input: []string{"c", "v"}, Output: []string{"d"},
				Attribute: []*onnxpb.Attribute{ints("kernel_shape", 1, 1)}},
			{OpType: proto.String("Sub"), Name: proto.String("skip"), Input: []string{"d", "c"}, Output: []string{"y"}},
		}}
	data, err := proto.Marshal(&onnxpb.Model{IrVersion: proto.Int64(7), Graph: g, OpsetImport: []*onnxpb.OpsetId{{Version: proto.Int64(13)}}})
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// TestEditorOpensONNX: the editor opens an .onnx file as a new, unsaved
// stack named after it, whose save-as offers the model's name as a stack
// file; a node the import stops at keeps the layers
// before it and the start-up notice says so. The command refuses the
// same model without --partial.
func TestEditorOpensONNX(t *testing.T) {
	dir := t.TempDir()
	model := filepath.Join(dir, "cap-inspector.onnx")
	if err := os.WriteFile(model, tinyModel(t), 0o644); err != nil {
		t.Fatal(err)
	}
	env := environment{paths: store.Paths{Keys: filepath.Join(dir, "none.yaml"), State: dir}}
	var errb strings.Builder
	opt, release, code := editorOptions(model, nil, env, IO{Err: &errb})
	release()
	if code != ExitOK || opt.Stack == nil || opt.Path != "" || opt.SaveName != filepath.Join(dir, "cap-inspector.yaml") || opt.Stack.Name != "cap-inspector" || len(opt.Stack.Layers) != 1 ||
		!strings.Contains(opt.Notice, `imported the one layer before`) || !strings.Contains(opt.Notice, `node 3, "skip" (Sub), where the import stops`) {
		t.Fatalf("options: code %d, path %q, stack %+v, notice %q, %s", code, opt.Path, opt.Stack, opt.Notice, errb.String())
	}
	var e strings.Builder
	if code := Run([]string{"import", model}, IO{Out: new(strings.Builder), Err: &e}); code != ExitProblems || !strings.Contains(e.String(), "--partial") {
		t.Errorf("import without --partial: exit %d, %s", code, e.String())
	}
}

// TestReadAllSized: the model reader gives a file's bytes whole, and one
// byte past the limit for a file over it (so the import can refuse it by
// size), for empty, small and over-limit files.
func TestReadAllSized(t *testing.T) {
	dir := t.TempDir()
	for _, tt := range []struct {
		size, limit int64
		want        int
	}{{0, 10, 0}, {5, 10, 5}, {10, 10, 10}, {11, 10, 11}, {4000, 10, 11}} {
		p := filepath.Join(dir, "m.onnx")
		data := strings.Repeat("x", int(tt.size))
		if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
			t.Fatal(err)
		}
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		got, err := readAllSized(f, tt.limit)
		f.Close()
		if err != nil || len(got) != tt.want || string(got) != data[:tt.want] {
			t.Errorf("size %d, limit %d: %d bytes, %v; want %d", tt.size, tt.limit, len(got), err, tt.want)
		}
	}
}
