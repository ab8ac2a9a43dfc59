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
	"stackfit/engine/stackfile"
)

const python = "/usr/bin/python3"

// needTorch skips the test unless Debian's python3-torch can be imported.
func needTorch(t *testing.T) {
	t.Helper()
	if err := exec.Command(python, "-c", "import torch").Run(); err != nil {
		t.Skip("PyTorch is not available to " + python + "; install Debian's python3-torch (.ci/run does)")
	}
}

// probe builds each exported module with PyTorch and reports its
// parameter count and the output shape of a dummy input.
const probe = `
import importlib.util, json, sys, torch
out = {}
for path in sys.argv[1:]:
    spec = importlib.util.spec_from_file_location("m", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    net = mod.MODEL().eval()
    with torch.no_grad():
        y = net(torch.zeros(1, *mod.INPUT_SHAPE))
    out[path] = {"params": sum(p.numel() for p in net.parameters() if p.requires_grad), "out": list(y.shape[1:])}
print(json.dumps(out))
`

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
// reference stacks PyTorch ran whole), builds each module with PyTorch
// (Debian python3-torch) and checks its parameter count and output shape
// against the engine's.
func TestExportBuildsInPyTorch(t *testing.T) {
	needTorch(t)
	dir := t.TempDir()
	files, _ := filepath.Glob("../../testdata/*/*.yaml")
	want := map[string]*engine.Analysis{}
	var paths []string
	for _, f := range files {
		s, err := stackfile.LoadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		p, an := exportFile(t, s, dir, f)
		want[p] = an
		paths = append(paths, p)
	}
	// The reference stacks cover every kind, odd sizes, same padding, crops.
	var doc struct {
		Cases []struct {
			Stack   json.RawMessage `json:"stack"`
			ErrorAt *int            `json:"error_at"`
		} `json:"cases"`
	}
	data, _ := os.ReadFile("../../testdata/reference/shapes.json")
	json.Unmarshal(data, &doc)
	for i, c := range doc.Cases {
		if c.ErrorAt != nil {
			continue
		}
		s, err := stackfile.Load(c.Stack)
		if err != nil {
			t.Fatal(err)
		}
		p, an := exportFile(t, s, dir, fmt.Sprintf("reference-%02d", i))
		want[p] = an
		paths = append(paths, p)
	}
	cmd := exec.Command(python, append([]string{"-c", probe}, paths...)...)
	out, err := cmd.Output()
	if err != nil {
		var stderr string
		if ee, ok := err.(*exec.ExitError); ok {
			stderr = string(ee.Stderr)
		}
		t.Fatalf("PyTorch could not build the modules: %v\n%s", err, stderr)
	}
	var got map[string]struct {
		Params int64
		Out    [3]int64
	}
	if err := json.Unmarshal(out, &got); err != nil {
		t.Fatal(err)
	}
	for p, an := range want {
		g := got[p]
		r := an.Result
		if g.Params != r.Totals.Params || g.Out != [3]int64{r.Output.C, r.Output.H, r.Output.W} {
			t.Errorf("%s: PyTorch %d params, out %v; engine %d params, out %v", filepath.Base(p), g.Params, g.Out, r.Totals.Params, r.Output)
		}
	}
	if len(want) < 50 {
		t.Errorf("only %d modules checked", len(want))
	}
}

// TestExportHostileText checks that names, notes and the stack name never
// become code: a note with a newline and a statement stays a comment.
func TestExportHostileText(t *testing.T) {
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
	needTorch(t)
	p := filepath.Join(dir, "evil.py")
	os.WriteFile(p, b.Bytes(), 0o644)
	if out, err := exec.Command(python, "-c", probe, p).CombinedOutput(); err != nil {
		t.Fatalf("the module does not run: %v\n%s\n%s", err, out, code)
	}
	if _, err := os.Stat(marker); err == nil {
		t.Fatal("a statement from the stack ran")
	}
}
