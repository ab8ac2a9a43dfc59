package cli

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/ui/store"
)

const b0File = "../../testdata/published/efficientnet-b0.yaml"

// TestScaleCommandB2 writes EfficientNet-B2 from B0 with torchvision's
// multipliers (torchvision 0.14 efficientnet.py, efficientnet_b2: width
// 1.1, depth 1.2, input 260) and holds the written file, loaded back, to
// torchvision's efficientnet_b2 as measured on Debian's torchvision 0.14.1:
// 9,109,994 parameters, 67,637 buffers, 993,561,872 MACs. The input file
// is left as it was.
func TestScaleCommandB2(t *testing.T) {
	before, err := os.ReadFile(b0File)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "b2.yaml")
	out, errs, code := run(t, "", "scale", b0File, "--width", "1.1", "--depth", "1.2", "--input", "260", "-o", p)
	if code != ExitOK || !strings.Contains(out, "wrote ") || !strings.Contains(out, "9,109,994 parameters") {
		t.Fatalf("exit %d:\n%s%s", code, out, errs)
	}
	s, err := store.LoadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	r := engine.Evaluate(s)
	if got := (engine.Totals{Params: 9109994, Buffers: 67637, MACs: 993561872}); r.Totals != got || r.Errors != 0 {
		t.Errorf("totals %+v (%d errors), want %+v (torchvision efficientnet_b2)", r.Totals, r.Errors, got)
	}
	if _, errs, code := run(t, "", "check", p); code != ExitOK {
		t.Errorf("check of the written copy: exit %d: %s", code, errs)
	}
	if after, _ := os.ReadFile(b0File); string(after) != string(before) {
		t.Error("the input file changed")
	}
}

// TestScaleCommandPhi: --phi 1 writes to standard output what compound
// scaling with the paper's constants gives (Tan & Le 2019, eq. 3: depth
// 1.2, width 1.1, resolution 1.15: 224 → 257.6, rounded to 258).
func TestScaleCommandPhi(t *testing.T) {
	out, errs, code := run(t, "", "scale", b0File, "--phi", "1")
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	p := filepath.Join(t.TempDir(), "phi1.yaml")
	if err := os.WriteFile(p, []byte(out), 0o644); err != nil {
		t.Fatal(err)
	}
	got, err := store.LoadFile(p)
	if err != nil {
		t.Fatalf("the output does not load back: %v", err)
	}
	b0, err := store.LoadFile(b0File)
	if err != nil {
		t.Fatal(err)
	}
	want, err := engine.Scale(b0, engine.DefaultCompound().At(1))
	if err != nil {
		t.Fatal(err)
	}
	if got.Input != (engine.Shape{C: 3, H: 258, W: 258}) {
		t.Errorf("input %v, want 3×258×258", got.Input)
	}
	if g, w := engine.Evaluate(got).Totals, engine.Evaluate(want).Totals; g != w {
		t.Errorf("totals %+v, want %+v", g, w)
	}
}

// TestScaleCommandMax: --max phi prints the answer and writes its variant,
// which check then finds to fit the same budget at the same batch.
func TestScaleCommandMax(t *testing.T) {
	p := filepath.Join(t.TempDir(), "max.yaml")
	out, errs, code := run(t, "", "scale", b0File, "--max", "phi", "--budget", "12GiB", "--batch", "64", "-o", p)
	if code != ExitOK {
		t.Fatalf("exit %d:\n%s%s", code, out, errs)
	}
	if !regexp.MustCompile(`largest phi that fits 12\.0 GiB per GPU at batch 64: phi = \d+\.\d\d \(to 0\.01; .*estimate`).MatchString(out) {
		t.Errorf("answer:\n%s", out)
	}
	if out, errs, code := run(t, "", "check", p, "--budget", "12GiB", "--batch", "64"); code != ExitOK || !strings.Contains(out, "memory: fits") {
		t.Errorf("the answer's variant: exit %d:\n%s%s", code, out, errs)
	}
	out, _, code = run(t, "", "scale", b0File, "--max", "width", "--budget", "1MiB")
	if code != ExitProblems || !strings.Contains(out, "nothing fits") {
		t.Errorf("a budget of 1 MiB: exit %d: %s", code, out)
	}
}

// TestScaleCommandRefuses: bad usage names the flag and the fix, and
// never writes over the input or an existing file.
func TestScaleCommandRefuses(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "net.yaml")
	data, err := os.ReadFile(b0File)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(in, data, 0o644); err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(dir, "other.yaml")
	if err := os.WriteFile(other, []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tt := range []struct {
		args []string
		want string
	}{
		{[]string{"--width", "1.1", "-o", in}, "does not write over its input"},
		{[]string{"--width", "1.1", "-o", other}, "exists"},
		{[]string{"--width", "abc"}, `--width "abc": give a number above 0`},
		{[]string{"--width", "-1"}, `--width "-1"`},
		{[]string{"--depth", "NaN"}, `--depth "NaN"`},
		{[]string{"--input", "0"}, `--input "0": give the height and width`},
		{[]string{"--input", "260", "--resolution", "1.1"}, "--input and --resolution"},
		{[]string{"--phi", "1", "--width", "2"}, "--phi and --width"},
		{[]string{"--max", "height", "--budget", "8GiB"}, `--max "height": give phi, width, depth or resolution`},
		{[]string{"--max", "width", "--width", "2", "--budget", "8GiB"}, "--max width searches what --width sets"},
		{[]string{"--max", "phi", "--budget", "none"}, "needs a memory budget"},
		{[]string{"--divisor", "0", "--width", "2"}, "--divisor"},
		{[]string{"--depth", "1e9"}, "--depth"},
		{nil, "give what to scale"},
	} {
		_, errs, code := run(t, "", append([]string{"scale", in}, tt.args...)...)
		if code != ExitUsage || !strings.Contains(errs, tt.want) {
			t.Errorf("%v: exit %d, %q; want %q", tt.args, code, errs, tt.want)
		}
	}
	if after, _ := os.ReadFile(in); string(after) != string(data) {
		t.Error("the input changed")
	}
	if after, _ := os.ReadFile(other); string(after) != "mine" {
		t.Error("an existing file was overwritten")
	}
	out, _, code := run(t, "", "scale", "--help")
	for _, f := range []string{"--width", "--depth", "--input", "--resolution", "--phi", "--alpha", "--beta", "--gamma", "--max", "-o", "--budget", "examples:"} {
		if code != ExitOK || !strings.Contains(out, f) {
			t.Errorf("scale --help lacks %s", f)
		}
	}
	if alt, _, _ := run(t, "", "help", "scale"); alt != out {
		t.Error("help scale differs from scale --help")
	}
}

// TestScaleCommandUnits: a stack written with units, widened, is written
// with its units (the uses' arguments carry the new widths) and computes
// what the same stack written out (testdata/examples/cap-inspector.yaml)
// computes widened the same way; where a unit cannot carry the scaling
// (its literal width would differ between two uses: the last weighted
// layer keeps its width), the copy is written out and says so.
func TestScaleCommandUnits(t *testing.T) {
	dir := t.TempDir()
	withUnits, plain := filepath.Join(dir, "units.yaml"), filepath.Join(dir, "plain.yaml")
	if out, errs, code := run(t, "", "scale", "../../testdata/examples/cap-inspector-units.yaml", "--width", "2", "-o", withUnits); code != ExitOK {
		t.Fatalf("exit %d:\n%s%s", code, out, errs)
	}
	if out, errs, code := run(t, "", "scale", "../../testdata/examples/cap-inspector.yaml", "--width", "2", "-o", plain); code != ExitOK {
		t.Fatalf("exit %d:\n%s%s", code, out, errs)
	}
	a, err := store.LoadFile(withUnits)
	if err != nil {
		t.Fatal(err)
	}
	b, err := store.LoadFile(plain)
	if err != nil {
		t.Fatal(err)
	}
	ra, rb := engine.Evaluate(a), engine.Evaluate(b)
	if len(a.Units) != 2 || ra.Totals != rb.Totals || len(ra.Rows) != len(rb.Rows) {
		t.Errorf("with units: %d units, %+v; written out: %+v", len(a.Units), ra.Totals, rb.Totals)
	}
	if data, _ := os.ReadFile(withUnits); !strings.Contains(string(data), "{unit: basic, c: 128, s: 2}") {
		t.Errorf("the uses' widths did not double:\n%s", data)
	}
	const twice = `stackfit: 1
input: [3, 32, 32]
units:
  cb:
    params: {c: 16}
    layers:
      - {conv: $c, kernel: 3, pad: 1}
      - {conv: 10, kernel: 1}
layers:
  - {unit: cb}
  - {unit: cb, c: 24}
`
	out, errs, code := run(t, twice, "scale", "-", "--width", "2")
	if code != ExitOK || !strings.Contains(errs, "the units are written out") || strings.Contains(out, "unit:") ||
		!strings.Contains(out, "{conv: 24, kernel: 1}") || !strings.Contains(out, "{conv: 10, kernel: 1}") {
		t.Errorf("exit %d:\n%s%s", code, out, errs)
	}
}
