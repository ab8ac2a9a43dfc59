package export

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"unicode/utf8"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// exportText exports s and returns the module's text.
func exportText(t *testing.T, s *engine.Stack, source string) string {
	t.Helper()
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	var b bytes.Buffer
	if err := PyTorch(&b, an, source); err != nil {
		t.Fatalf("%s: %v", source, err)
	}
	return b.String()
}

// loadStack reads a stack file's text.
func loadStack(t *testing.T, src string) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// exportCorpus is every stack under testdata/ plus the small stacks
// below, exported: name → module text.
func exportCorpus(t *testing.T) map[string]string {
	t.Helper()
	mods := map[string]string{
		"names":  exportText(t, loadStack(t, namesStack), "names.yaml"),
		"small":  exportText(t, loadStack(t, smallStack), "small.yaml"),
		"plain":  exportText(t, loadStack(t, plainStack), "plain.yaml"),
		"invres": exportText(t, loadStack(t, invertedStack), "invres.yaml"),
	}
	paths, _ := filepath.Glob("../../testdata/*/*.yaml")
	for _, f := range paths {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(data)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
		if an.Result.Errors > 0 || len(an.Result.Rows) == 0 {
			continue
		}
		mods[f] = exportText(t, s, f)
	}
	return mods
}

// smallStack names two outputs; a merge reads only the first.
const smallStack = `stackfit: 1
name: small
input: [3, 16, 16]
training: {batch: 16, precision: bf16-mixed, optimizer: adamw}
layers:
  - {conv: 8, kernel: 3, pad: 1, name: s0}
  - {act: relu, name: s1}
  - block: 2
    residual: true
    layers:
      - {conv: 8, kernel: 3, pad: 1}
  - {add: s0}
  - global-pool
  - {dense: 4}
`

// plainStack calls no helper.
const plainStack = `stackfit: 1
name: plain
input: [3, 16, 16]
layers:
  - {conv: 8, kernel: 3, pad: 1, name: stem}
  - {norm: batch}
  - {act: relu}
  - global-pool
`

// invertedStack is an inverted residual whose first repeat changes the
// shape, so only the second adds its input.
const invertedStack = `stackfit: 1
name: invres
input: [8, 16, 16]
layers:
  - block: 2
    residual: true
    shortcut: identity
    layers:
      - {conv: 16, kernel: 3, pad: 1}
`

// TestExportDefinesOnlyUsedHelpers: the module defines a helper class or
// function exactly when a generated line calls it (plain convolutions need
// none; namesStack calls every one). Common practice: generated code holds
// no dead definitions.
func TestExportDefinesOnlyUsedHelpers(t *testing.T) {
	for name, mod := range exportCorpus(t) {
		for _, h := range helpers {
			def := regexp.MustCompile(`(?m)^(class|def) ` + h.name + `\(`)
			call := regexp.MustCompile(`(?m)^        .*[^A-Za-z0-9_]` + h.name + `\(`)
			if defined, called := def.MatchString(mod), call.MatchString(mod); defined != called {
				t.Errorf("%s: %s defined %v, called %v", name, h.name, defined, called)
			}
		}
	}
	mods := exportCorpus(t)
	if strings.Contains(mods["plain"], "\nclass Dense(") || strings.Contains(mods["plain"], "def center_crop") {
		t.Errorf("a stack of plain layers got helpers:\n%s", mods["plain"])
	}
	for _, h := range helpers {
		if !strings.Contains(mods["names"], "(nn.Module):\n") || !regexp.MustCompile(`(?m)^(class|def) `+h.name+`\(`).MatchString(mods["names"]) {
			t.Errorf("namesStack uses %s, but the module does not define it", h.name)
		}
	}
}

// assign matches a forward line that stores x in a temporary.
var assign = regexp.MustCompile(`^        ([A-Za-z_][A-Za-z0-9_]*) = `)

// TestExportTemporariesAreRead: every temporary forward assigns (other
// than x and the shortcut's sc) is read by a later line: a named output
// only when a merge reads it, a residual's input only when it is added
// back. Common practice: generated code holds no dead stores.
func TestExportTemporariesAreRead(t *testing.T) {
	for name, mod := range exportCorpus(t) {
		_, fwd, ok := strings.Cut(mod, "    def forward(self, x):\n")
		if !ok {
			t.Fatalf("%s: no forward", name)
		}
		fwd, _, _ = strings.Cut(fwd, "        return x\n")
		lines := strings.Split(fwd, "\n")
		for i, line := range lines {
			m := assign.FindStringSubmatch(line)
			if m == nil || m[1] == "x" || m[1] == "sc" {
				continue
			}
			word := regexp.MustCompile(`[^A-Za-z0-9_]` + m[1] + `[^A-Za-z0-9_]`)
			read := false
			for _, later := range lines[i+1:] {
				if !strings.HasPrefix(strings.TrimSpace(later), "#") && word.MatchString(later+" ") {
					read = true
					break
				}
			}
			if !read {
				t.Errorf("%s: %q is never read", name, strings.TrimSpace(line))
			}
		}
	}
	small := exportCorpus(t)["small"]
	for _, want := range []string{"        # output of \"s0\"\n        t0 = x\n", "        # output of \"s1\"\n        r3_1 = x\n", "x = x + t0\n"} {
		if !strings.Contains(small, want) {
			t.Errorf("small lacks %q:\n%s", want, small)
		}
	}
}

// TestExportCommentsReadable: names in comments read as written — quotes
// and backslashes unescaped — while a line break, a tab, a terminal or
// bidirectional control and invalid UTF-8 are escaped, so no name leaves
// its comment line; the module stays valid UTF-8 (PEP 263: it declares
// utf-8).
func TestExportCommentsReadable(t *testing.T) {
	names := map[string]string{
		"s0":                    `"s0"`,
		`say "hi" \ there`:      `"say "hi" \ there"`,
		"a\nb = 1":              `"a\nb = 1"`,
		"tab\there\r\n":         `"tab\there\r\n"`,
		"x\x1b]0;pwned\x07":     `"x\x1b]0;pwned\a"`,
		"rtl\u202eevil":         `"rtl\u202eevil"`,
		"bad\xffbyte":           `"bad\xffbyte"`,
		"Ünïcödé 名前":            `"Ünïcödé 名前"`,
		"line\u2028sep\u0085nl": `"line\u2028sep\u0085nl"`,
	}
	for name, want := range names {
		s := &engine.Stack{
			Name:  "c",
			Input: engine.Shape{C: 3, H: 8, W: 8},
			Layers: []engine.Layer{
				{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Name: name},
				{Kind: engine.KindAct},
				{Kind: engine.KindConcat, From: name},
			},
		}
		mod := exportText(t, s, `C:\stacks\"c".yaml`)
		if !utf8.ValidString(mod) {
			t.Errorf("%q: the module is not valid UTF-8", name)
		}
		if !strings.Contains(mod, "        # output of "+want+"\n        t0 = x\n") {
			t.Errorf("%q: no comment %q:\n%s", name, want, mod)
		}
		if !strings.Contains(mod, "# from \"C:\\stacks\\\"c\".yaml\"\n") {
			t.Errorf("%q: the source line is not as written:\n%s", name, mod)
		}
		for _, line := range strings.Split(mod, "\n") {
			if strings.Contains(line, "pwned") || strings.Contains(line, "b = 1") || strings.Contains(line, "evil") {
				if !strings.HasPrefix(strings.TrimSpace(line), "# output of ") {
					t.Errorf("%q: the name left its comment: %q", name, line)
				}
			}
		}
	}
}

// TestMeasureDefaultsToTheFile: the measuring entry point's defaults are
// the stack file's training settings the header names (the batch one
// GPU's micro-batch), not batch 1, fp32 and SGD; its flags still take
// them. The reference suite runs it (TestMeasureAndCalibrate in ui/cli).
func TestMeasureDefaultsToTheFile(t *testing.T) {
	s := loadStack(t, strings.Replace(smallStack, "{batch: 16,", "{batch: 64, gpus: 4,", 1))
	mod := exportText(t, s, "small.yaml")
	for _, want := range []string{
		"at batch 64 (micro-batch 16 per GPU), bf16-mixed, adamw\n",
		"    \"batch\": 16,\n    \"precision\": \"bf16-mixed\",\n    \"optimizer\": \"adamw\",\n",
		`ap.add_argument("--batch", type=int, default=ESTIMATE["batch"]`,
		`ap.add_argument("--precision", default=ESTIMATE["precision"]`,
		`ap.add_argument("--optimizer", default=ESTIMATE["optimizer"]`,
	} {
		if !strings.Contains(mod, want) {
			t.Errorf("the module lacks %q", want)
		}
	}
	plain := exportText(t, loadStack(t, plainStack), "plain.yaml")
	if !strings.Contains(plain, "    \"batch\": 1,\n    \"precision\": \"fp32\",\n    \"optimizer\": \"sgd\",\n") {
		t.Error("a file without training settings does not default to batch 1, fp32, sgd")
	}
}
