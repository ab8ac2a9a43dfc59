package export

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// hostileNames are stack names (and, where not empty, the name of the
// first layer) that a careless exporter would turn into broken or
// misleading Python: keywords and builtins (Python 3.11's keyword and
// builtins modules), the prelude's helpers and the module's own globals,
// leading digits, encoding declarations (PEP 263), terminal escapes and
// line breaks.
var hostileNames = []string{
	"None", "none", "True", "true", "False", "false", "class", "Class", "import", "def", "lambda",
	"self", "super", "print", "object", "Exception", "exception", "ValueError", "Ellipsis",
	"NotImplemented", "__import__", "__name__", "type", "match", "case", "_",
	"ChannelLayerNorm", "channel layer norm", "Dense", "dense", "PositionDense", "position dense",
	"ChannelScale", "channel scale", "SpatialGate", "spatial gate", "DropPath", "drop path", "center_crop", "CenterCrop",
	"torch", "Torch", "nn", "NN", "MODEL", "model", "INPUT_SHAPE", "input shape", "x", "sc", "t0",
	"123net", "9", "0 day", "", "---", "DenseNet", "NoneNet",
	"-*- coding: utf-7 -*-", "# -*- coding: latin-1 -*-", "vim: set fileencoding=utf-7 :",
	"Ünïcödé", "名前", "x\x1b]0;pwned\x07", "evil\nimport os\nos._exit(1)", "tab\there\r\n",
}

// namesStack is a small stack using every helper the prelude defines
// (ChannelLayerNorm, PositionDense, ChannelScale, SpatialGate, DropPath, center_crop and
// Dense), so a class that shadowed one would fail to build or run.
const namesStack = `stackfit: 1
name: placeholder
input: [3, 12, 12]
layers:
  - {conv: 8, kernel: 3, pad: 1, name: first}
  - {norm: layer}
  - block: 1
    name: stage
    residual: true
    shortcut: identity
    drop-path: 0.1
    layers:
      - {conv: x1, kernel: 3, pad: 1}
      - {dense: x2, per-position: true}
      - {act: gelu}
      - {dense: x1, per-position: true}
      - {scale: 1e-06}
      - {spatial-gate: 7}
  - {conv: 8, kernel: 3}
  - {add: first, crop: true}
  - {concat: stage, crop: true}
  - global-pool
  - {dense: 4}
`

// namesProbe imports each module, reads its source encoding the way Python
// does (tokenize.detect_encoding, PEP 263), checks the class name is a
// usable identifier that leaves the helpers and globals alone, and runs
// the model on the CPU in training and evaluation mode.
const namesProbe = `
import builtins, importlib.util, json, keyword, sys, tokenize, traceback
try:
    import torch
except ImportError:
    sys.exit(3)

HELPERS = ["ChannelLayerNorm", "Dense", "PositionDense", "ChannelScale", "SpatialGate", "DropPath", "center_crop"]

for line in sys.stdin:
    case = json.loads(line)
    res = {"name": case["name"]}
    try:
        with open(case["path"], "rb") as f:
            res["encoding"] = tokenize.detect_encoding(f.readline)[0]
        spec = importlib.util.spec_from_file_location("hostile_" + case["name"], case["path"])
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        cls = mod.MODEL
        n = cls.__name__
        res["class"] = n
        res["identifier"] = (n.isidentifier() and not keyword.iskeyword(n)
                             and not keyword.issoftkeyword(n) and not hasattr(builtins, n))
        res["intact"] = (all(getattr(mod, h) is not cls and getattr(mod, h).__module__ == mod.__name__ for h in HELPERS)
                         and mod.torch is torch and mod.nn is torch.nn and isinstance(mod.INPUT_SHAPE, tuple))
        torch.manual_seed(0)
        net = cls()
        res["params"] = sum(p.numel() for p in net.parameters() if p.requires_grad)
        with torch.no_grad():
            res["train_out"] = list(net.train()(torch.zeros(2, *mod.INPUT_SHAPE)).shape[1:])
            res["eval_out"] = list(net.eval()(torch.zeros(2, *mod.INPUT_SHAPE)).shape[1:])
    except Exception as e:
        res["error"] = "".join(traceback.format_exception_only(type(e), e)).strip()
    print(json.dumps(res), flush=True)
`

type namesResult struct {
	Name       string  `json:"name"`
	Encoding   string  `json:"encoding"`
	Class      string  `json:"class"`
	Identifier bool    `json:"identifier"`
	Intact     bool    `json:"intact"`
	Params     int64   `json:"params"`
	TrainOut   []int64 `json:"train_out"`
	EvalOut    []int64 `json:"eval_out"`
	Error      string  `json:"error"`
}

// hostileStack returns namesStack under the stack name name, its first
// layer (and the merge reading it) renamed to name as well when not empty.
func hostileStack(t *testing.T, name string) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load([]byte(namesStack))
	if err != nil {
		t.Fatal(err)
	}
	s.Name = name
	if name != "" && name != "stage" {
		for i := range s.Layers {
			l := &s.Layers[i]
			if l.Name == "first" {
				l.Name = name
			}
			if l.From == "first" {
				l.From = name
			}
		}
	}
	return s
}

// codingLine is PEP 263's pattern for an encoding declaration.
var codingLine = regexp.MustCompile(`^[ \t\f]*#.*?coding[:=][ \t]*([-\w.]+)`)

// TestExportHostileNames exports the stack under every hostile name (from
// a file whose name declares an encoding too), then imports, builds and
// runs all the modules in one PyTorch process (Debian python3-torch).
func TestExportHostileNames(t *testing.T) {
	needReference(t)
	t.Parallel()
	dir := t.TempDir()
	const source = "-*- coding: utf-7 -*-.yaml"
	var cases []probeCase
	want := map[string]*engine.Analysis{}
	for i, name := range hostileNames {
		s := hostileStack(t, name)
		an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
		if an.Result.Errors != 0 {
			t.Fatalf("%q: the stack has errors: %v", name, an.Result.Diags)
		}
		var b bytes.Buffer
		if err := PyTorch(&b, an, source); err != nil {
			t.Fatalf("%q: %v", name, err)
		}
		lines := strings.SplitN(b.String(), "\n", 3)
		if lines[0] != "# -*- coding: utf-8 -*-" {
			t.Errorf("%q: line 1 is %q", name, lines[0])
		}
		if m := codingLine.FindStringSubmatch(lines[1]); m != nil {
			t.Errorf("%q: line 2 declares the encoding %s: %q", name, m[1], lines[1])
		}
		key := strconv.Itoa(i)
		p := filepath.Join(dir, "m"+key+".py")
		if err := os.WriteFile(p, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		cases = append(cases, probeCase{Name: key, Path: p})
		want[key] = an
	}
	got := runPython(t, namesProbe, cases, map[int]string{
		probeNoTorch: "PyTorch is not available to " + python + "; install Debian's python3-torch (.ci/run does)",
	}, func(r namesResult) string { return r.Name })
	for i, name := range hostileNames {
		key := strconv.Itoa(i)
		t.Run(strconv.Quote(name), func(t *testing.T) {
			g, ok := got[key]
			switch {
			case !ok:
				t.Fatal("the probe printed nothing for it")
			case g.Error != "":
				t.Fatalf("PyTorch could not import, build or run it: %s", g.Error)
			}
			if g.Encoding != "utf-8" {
				t.Errorf("Python reads the module as %s", g.Encoding)
			}
			if !g.Identifier || !g.Intact {
				t.Errorf("class %q: a usable identifier %v, helpers and globals intact %v", g.Class, g.Identifier, g.Intact)
			}
			if g.Class != className(name) {
				t.Errorf("Python's class is %q, className gives %q", g.Class, className(name))
			}
			r := want[key].Result
			out := []int64{r.Output.C, r.Output.H, r.Output.W}
			if g.Params != r.Totals.Params || !slices.Equal(g.TrainOut, out) || !slices.Equal(g.EvalOut, out) {
				t.Errorf("PyTorch: %d parameters, output %v (training) %v (evaluation); the engine: %d, %v",
					g.Params, g.TrainOut, g.EvalOut, r.Totals.Params, out)
			}
		})
	}
}

// TestClassNameAlwaysUsable checks className on the hostile names and on
// every single byte and a spread of runes: always an ASCII identifier that
// starts with a capital letter and is not reserved. The Python check of
// the same names is TestExportHostileNames.
func TestClassNameAlwaysUsable(t *testing.T) {
	ident := regexp.MustCompile(`^[A-Z][A-Za-z0-9]*$`)
	names := slices.Clone(hostileNames)
	for c := 0; c < 256; c++ {
		names = append(names, string([]byte{byte(c)}), "9"+string(rune(c)))
	}
	for _, line := range strings.Fields(pythonNames) {
		names = append(names, line, strings.ToLower(line))
	}
	for _, n := range names {
		got := className(n)
		if !ident.MatchString(got) || reserved(got) {
			t.Errorf("className(%q) = %q", n, got)
		}
	}
	for n, want := range map[string]string{
		"None": "NoneNet", "none": "NoneNet", "true": "TrueNet", "dense": "DenseNet", "Dense": "DenseNet",
		"drop path": "DropPathNet", "torch": "Torch", "MODEL": "MODELNet", "123net": "Net123net",
		"": "Net", "fruit grader": "FruitGrader", "Exception": "ExceptionNet",
	} {
		if got := className(n); got != want {
			t.Errorf("className(%q) = %q, want %q", n, got, want)
		}
	}
}
