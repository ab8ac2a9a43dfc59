package export

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
)

const python = "/usr/bin/python3"

// probeNoTorch is the status the probe exits with (its sys.exit(3)) when
// PyTorch cannot be imported.
const probeNoTorch = 3

// probe builds exported modules with PyTorch in one process. Its stdin
// holds one JSON object per module ({"name", "path", "cpu"}); for each it
// prints one JSON line: the trainable parameter count and the output shape
// (batch dimension dropped) of a zero input. Every module runs on PyTorch's
// meta device, which works out shapes with PyTorch's own shape rules but
// does no arithmetic, so ResNet-152 at 224×224 takes milliseconds; it is
// built there too, skipping the weight initialisation. A module marked
// "cpu" is instead built with real weights and also run on the CPU, and
// that shape is reported as well. A module that fails gets an "error" line
// and the others still run.
const probe = `
import importlib.util, json, sys, traceback
try:
    import torch
except ImportError:
    sys.exit(3)


` + metaPython + `

def run(net, shape, device):
    with torch.no_grad():
        return list(net.eval()(torch.zeros(1, *shape, device=device)).shape[1:])


for line in sys.stdin:
    case = json.loads(line)
    res = {"name": case["name"]}
    try:
        spec = importlib.util.spec_from_file_location("m", case["path"])
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        if case["cpu"]:
            net = mod.MODEL()
            res["cpu_out"] = run(net, mod.INPUT_SHAPE, "cpu")
        else:
            with on_meta():
                net = mod.MODEL()
        net = net.to("meta")
        res["params"] = sum(p.numel() for p in net.parameters() if p.requires_grad)
        res["out"] = run(net, mod.INPUT_SHAPE, "meta")
    except Exception as e:
        res["error"] = "".join(traceback.format_exception_only(type(e), e)).strip()
    print(json.dumps(res), flush=True)
`

// probeCase is one module for the probe; probeResult is its answer.
type probeCase struct {
	Name string `json:"name"`
	Path string `json:"path"`
	CPU  bool   `json:"cpu"`
}

type probeResult struct {
	Name   string  `json:"name"`
	Params int64   `json:"params"`
	Out    []int64 `json:"out"`
	CPUOut []int64 `json:"cpu_out"`
	Error  string  `json:"error"`
}

// runProbe runs the probe once over every case and returns its answers by
// name. It skips the test when python3 or PyTorch is missing.
func runProbe(t *testing.T, cases []probeCase) map[string]probeResult {
	t.Helper()
	return runPython(t, probe, cases, map[int]string{
		probeNoTorch: "PyTorch is not available to " + python + "; install Debian's python3-torch (.ci/run does)",
	}, func(r probeResult) string { return r.Name })
}

// cpuMACs is the most multiply-accumulates per sample for which a module is
// also run on the CPU (milliseconds each): LeNet-5, the cap inspector and
// most of the reference stacks, so real kernels check the meta device's
// shapes on every construct those use. The big networks (up to VGG-19's
// 19.6 G) run on the meta device only.
const cpuMACs = 200_000_000

func exportFile(t *testing.T, s *engine.Stack, dir, name string) (string, *engine.Analysis) {
	t.Helper()
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	var b bytes.Buffer
	if err := PyTorch(&b, an, name); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	p := filepath.Join(dir, strings.NewReplacer("/", "_", ".", "_").Replace(name)+".py")
	if err := os.WriteFile(p, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return p, an
}

// TestExportBuildsInPyTorch exports every stack in testdata/ (and the
// reference stacks PyTorch ran whole), builds all the modules with PyTorch
// (Debian python3-torch) in one process and checks each one's parameter
// count and output shape (on the meta device, and for the small ones on
// the CPU as well) against the engine's, in a subtest named after the
// stack.
func TestExportBuildsInPyTorch(t *testing.T) {
	needReference(t)
	t.Parallel()
	dir := t.TempDir()
	var cases []probeCase
	want := map[string]*engine.Analysis{}
	add := func(name string, s *engine.Stack, source string) {
		p, an := exportFile(t, s, dir, source)
		cases = append(cases, probeCase{Name: name, Path: p, CPU: an.Result.Totals.MACs <= cpuMACs})
		want[name] = an
	}
	paths, _ := filepath.Glob("../../testdata/*/*.yaml")
	files := map[string]bool{} // the stack names built from files
	for _, f := range paths {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(data)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		rel, _ := filepath.Rel("../../testdata", f)
		add(strings.TrimSuffix(strings.ReplaceAll(rel, string(filepath.Separator), "-"), ".yaml"), s, f)
		files[s.Name] = true
	}
	// The built-in examples, which a new user exports first.
	for _, e := range examples.All() {
		s, err := stackfile.Load(e.Data())
		if err != nil {
			t.Fatalf("example %s: %v", e.Name, err)
		}
		add("example-"+e.Name, s, "example-"+e.Name)
	}
	// The reference stacks cover every kind, odd sizes, same padding, crops.
	var doc struct {
		Cases []struct {
			Stack   json.RawMessage `json:"stack"`
			ErrorAt *int            `json:"error_at"`
		} `json:"cases"`
	}
	data, err := os.ReadFile("../../testdata/reference/shapes.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	for i, c := range doc.Cases {
		if c.ErrorAt != nil {
			continue
		}
		s, err := stackfile.Load(c.Stack)
		if err != nil {
			t.Fatal(err)
		}
		if files[s.Name] {
			continue // a published file at a smaller input: built above already
		}
		name := fmt.Sprintf("reference-%02d", i)
		add(name, s, name)
	}
	if len(cases) < 50 {
		t.Errorf("only %d modules to check", len(cases))
	}
	cpu := 0
	for _, c := range cases {
		if c.CPU {
			cpu++
		}
	}
	if cpu < 40 {
		t.Errorf("only %d modules run on the CPU", cpu)
	}

	got := runProbe(t, cases)
	for _, c := range cases {
		t.Run(c.Name, func(t *testing.T) {
			g, ok := got[c.Name]
			if !ok {
				t.Fatal("the probe printed nothing for it")
			}
			if g.Error != "" {
				t.Fatalf("PyTorch could not build or run %s: %s", filepath.Base(c.Path), g.Error)
			}
			r := want[c.Name].Result
			out := []int64{r.Output.C, r.Output.H, r.Output.W}
			if g.Params != r.Totals.Params {
				t.Errorf("PyTorch counts %d parameters, the engine %d", g.Params, r.Totals.Params)
			}
			if !slices.Equal(g.Out, out) {
				t.Errorf("PyTorch output %v, the engine's %v", g.Out, out)
			}
			if c.CPU && !slices.Equal(g.CPUOut, out) {
				t.Errorf("PyTorch output on the CPU %v, the engine's %v", g.CPUOut, out)
			}
		})
	}
}

// TestExportHostileText checks that names, notes and the stack name never
// become code: a note with a newline and a statement stays a comment.
func TestExportHostileText(t *testing.T) {
	needReference(t)
	t.Parallel()
	dir := t.TempDir()
	marker := filepath.Join(dir, "pwned")
	stmt := "open(" + `"` + marker + `"` + ", 'w').write('x')"
	s := &engine.Stack{
		Name:  "evil\n" + stmt + "\nclass X:",
		Note:  "first line\n" + stmt + "\r\n\"\"\"\n" + stmt,
		Input: engine.Shape{C: 3, H: 8, W: 8},
		Layers: []engine.Layer{
			{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Name: "a\n" + stmt},
			{Kind: engine.KindAct, Name: "b\"); " + stmt + " #"},
			{Kind: engine.KindConcat, From: "a\n" + stmt},
		},
	}
	var b bytes.Buffer
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	if an.Result.Errors != 0 {
		t.Fatalf("stack errors: %v", an.Result.Diags)
	}
	if err := PyTorch(&b, an, "evil\nname.yaml"); err != nil {
		t.Fatal(err)
	}
	code := b.String()
	for _, line := range strings.Split(code, "\n") {
		if strings.Contains(line, "open(") && !strings.HasPrefix(strings.TrimSpace(line), "#") {
			t.Errorf("text from the stack became code: %q", line)
		}
	}
	if !strings.Contains(code, "class Evil") {
		t.Errorf("class name not sanitised:\n%s", code)
	}
	p := filepath.Join(dir, "evil.py")
	if err := os.WriteFile(p, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	got := runProbe(t, []probeCase{{Name: "evil", Path: p, CPU: true}})
	if g := got["evil"]; g.Error != "" || len(g.CPUOut) != 3 {
		t.Fatalf("the module does not run: %+v\n%s", g, code)
	}
	if _, err := os.Stat(marker); err == nil {
		t.Fatal("a statement from the stack ran")
	}
}
