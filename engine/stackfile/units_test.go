package stackfile

import (
	"strings"
	"testing"

	"stackfit/engine"
)

// unitFile is a small stack written with units: a convolution–norm–
// activation triple with a required width, a unit that uses it twice
// (passing its own parameter on), and uses at the top level and inside a
// block.
const unitFile = `stackfit: 1
name: units
input: [3, 64, 64]
units:
  cna:
    params: {c: ~, k: 3, s: 1, act: relu}
    layers:
      - {conv: $c, kernel: $k, stride: $s, pad: same, bias: false}
      - {norm: batch}
      - {act: $act}
  down:
    params: {c: 32}
    layers:
      - {unit: cna, c: $c, s: 2}
      - {unit: cna, c: $c, k: 1, act: silu}
layers:
  - {unit: cna, c: 16, k: 5, name: stem}
  - {unit: down, c: 32}
  - block: 2
    layers:
      - {unit: down, c: 64}
  - {unit: down, repeat: 2}
`

// TestUnitsExpand: every use's body is the unit's layers with the use's
// values, nested uses included; a use is a block (repeat 1 unless given).
func TestUnitsExpand(t *testing.T) {
	s, err := Load([]byte(unitFile))
	if err != nil {
		t.Fatal(err)
	}
	stem := s.Layers[0]
	if stem.Kind != engine.KindBlock || stem.Repeat != 1 || stem.Unit != "cna" || len(stem.Body) != 3 {
		t.Fatalf("stem: %+v", stem)
	}
	if c := stem.Body[0]; c.Filters != 16 || c.Kernel != engine.Square(5) || len(c.Binds) != 0 {
		t.Errorf("stem conv: %+v", c)
	}
	down := s.Layers[1].Body
	if len(down) != 2 || down[0].Unit != "cna" || down[0].Body[0].Filters != 32 || down[0].Body[0].Stride != engine.Square(2) ||
		down[1].Body[0].Kernel != engine.Square(1) || down[1].Body[2].Act != engine.ActSiLU {
		t.Errorf("down: %+v", down)
	}
	if got := down[0].Args; len(got) != 2 || got[0] != (engine.Arg{Name: "c", Value: "32"}) {
		t.Errorf("a nested use shows its values: %v", got)
	}
	if last := s.Layers[3]; last.Repeat != 2 || last.Body[0].Body[0].Filters != 32 {
		t.Errorf("the default width and the repeat: %+v", last)
	}
	r := engine.Evaluate(s)
	if r.Errors != 0 {
		t.Fatalf("errors: %d", r.Errors)
	}
	// the same net written out inline has the same rows
	in := engine.Inline(s)
	if len(in.Units) != 0 || in.Layers[0].Unit != "" {
		t.Fatalf("inline kept units: %+v", in.Layers[0])
	}
	data, err := Save(in)
	if err != nil {
		t.Fatal(err)
	}
	back, err := Load(data)
	if err != nil {
		t.Fatalf("%v\n%s", err, data)
	}
	r2 := engine.Evaluate(back)
	if len(r2.Rows) != len(r.Rows) || r2.Totals != r.Totals {
		t.Fatalf("inline: %d rows %+v; units: %d rows %+v", len(r2.Rows), r2.Totals, len(r.Rows), r.Totals)
	}
	for i := range r.Rows {
		if a, b := r.Rows[i], r2.Rows[i]; a.Path != b.Path || a.Out != b.Out || a.Params != b.Params || a.MACs != b.MACs {
			t.Errorf("row %d: %v %v vs %v %v", i, a.Path, a.Out, b.Path, b.Out)
		}
	}
}

// TestUnitsRoundTrip: units and uses are saved as written, never
// expanded, and load back equal.
func TestUnitsRoundTrip(t *testing.T) {
	s, err := Load([]byte(unitFile))
	if err != nil {
		t.Fatal(err)
	}
	data, err := Save(s)
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	for _, want := range []string{"units:", "cna:", "params: {c: ~, k: 3, s: 1, act: relu}", "{conv: $c, kernel: $k, stride: $s, pad: same, bias: false}",
		"{act: $act}", "{unit: cna, c: $c, s: 2}", "{unit: cna, c: 16, k: 5, name: stem}", "{unit: down, repeat: 2}"} {
		if !strings.Contains(text, want) {
			t.Errorf("saved file lacks %q:\n%s", want, text)
		}
	}
	if strings.Count(text, "norm: batch") != 1 {
		t.Errorf("the expansion was saved:\n%s", text)
	}
	back, err := Load(data)
	if err != nil {
		t.Fatal(err)
	}
	again, _ := Save(back)
	if string(again) != text {
		t.Errorf("not stable:\n%s\n---\n%s", text, again)
	}
	if !engine.EqualLayers(back.Layers, s.Layers) || len(back.Units) != 2 || !engine.EqualLayers(back.Units[0].Body, s.Units[0].Body) {
		t.Error("reloaded stack differs")
	}
}

// TestUnitErrors: a use or definition that cannot be expanded is refused
// with a message naming the use, the unit and its line, and the fix.
func TestUnitErrors(t *testing.T) {
	head := "stackfit: 1\ninput: [3, 32, 32]\nunits:\n  cna:\n    params: {c: ~, k: 3}\n    layers:\n      - {conv: $c, kernel: $k}\n      - {act: relu}\n"
	for _, tc := range []struct{ name, body, want string }{
		{"unknown unit", "layers:\n  - {unit: cnaa, c: 8}\n", `layer 1: no unit is named "cnaa"; did you mean "cna"?`},
		{"unknown argument", "layers:\n  - {unit: cna, c: 8, kk: 3}\n", `unit cna (line 4): has no parameter "kk"; did you mean "k"? (its parameters: c, k)`},
		{"missing argument", "layers:\n  - {unit: cna}\n", "needs c (it has no default); add c: VALUE to the use"},
		{"bad value", "layers:\n  - {unit: cna, c: 8, k: big}\n", `k = "big" does not suit the conv's kernel`},
		{"zero width", "layers:\n  - {unit: cna, c: 0}\n", `c = "0" does not suit the conv's filters`},
		{"reference outside a unit", "layers:\n  - {conv: $c, kernel: 3}\n", "only a unit's layers can refer to one"},
		{"undeclared reference", "layers:\n  - {unit: cna, c: 8}\n", ""},
		{"argument given twice", "layers:\n  - {unit: cna, c: 8, c: 9}\n", `key "c" appears twice`},
	} {
		_, err := Load([]byte(head + tc.body))
		switch {
		case tc.want == "" && err != nil:
			t.Errorf("%s: %v", tc.name, err)
		case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("%s: got %v, want %q", tc.name, err, tc.want)
		}
	}
	for _, tc := range []struct{ name, file, want string }{
		{"cycle", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    layers: [{unit: b}]\n  b:\n    layers: [{unit: a}]\nlayers:\n  - {unit: a}\n",
			"uses itself (through a → b → a)"},
		{"undeclared parameter", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    params: {c: 4}\n    layers: [{conv: $d, kernel: 1}]\nlayers:\n  - {unit: a}\n",
			"unit a declares no d (its parameters: c)"},
		{"named layer in a unit", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    layers: [{conv: 4, kernel: 1, name: x}]\nlayers:\n  - {unit: a}\n",
			"a unit's layers cannot be named"},
		{"reserved parameter", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    params: {repeat: 2}\n    layers: [{conv: 4, kernel: 1}]\nlayers:\n  - {unit: a}\n",
			`"repeat" is a word a use of the unit already means`},
		{"default that does not suit", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    params: {k: wide}\n    layers: [{conv: 4, kernel: $k}]\nlayers:\n  - {unit: a}\n",
			`$k's default "wide" does not suit this field`},
		{"unit defined twice", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    layers: [{conv: 4, kernel: 1}]\n  a:\n    layers: [{conv: 4, kernel: 1}]\nlayers:\n  - {unit: a}\n",
			`key "a" appears twice`},
		{"no layers", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a:\n    params: {c: 4}\nlayers:\n  - {unit: a}\n",
			"needs layers"},
		{"too deep", "stackfit: 1\ninput: [3, 8, 8]\nunits:\n  a: {layers: [{unit: b}]}\n  b: {layers: [{unit: c}]}\n  c: {layers: [{unit: d}]}\n  d: {layers: [{conv: 4, kernel: 1}]}\nlayers:\n  - {unit: a}\n",
			"units nest 4 deep here; the limit is 3"},
	} {
		_, err := Load([]byte(tc.file))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: got %v, want %q", tc.name, err, tc.want)
		}
	}
}

// TestUnitExpansionBounded: units that each use the next many times
// would expand to billions of layers; the expansion stops with a message
// instead of filling memory.
func TestUnitExpansionBounded(t *testing.T) {
	var b strings.Builder
	b.WriteString("stackfit: 1\ninput: [3, 8, 8]\nunits:\n")
	for _, u := range []string{"a", "b", "c"} {
		next := map[string]string{"a": "b", "b": "c", "c": ""}[u]
		b.WriteString("  " + u + ":\n    layers:\n")
		for i := 0; i < 2000; i++ {
			if next == "" {
				b.WriteString("      - {act: relu}\n")
			} else {
				b.WriteString("      - {unit: " + next + "}\n")
			}
		}
	}
	b.WriteString("layers:\n  - {unit: a}\n")
	_, err := Load([]byte(b.String()))
	if err == nil || !strings.Contains(err.Error(), "expand to more than") {
		t.Errorf("got %v", err)
	}
}

// TestUnitPairArguments: a use may pass a kernel and a padding as
// [height, width] (Inception v3's 1×7 and 7×1 convolutions, padded 0×3
// and 3×0: Szegedy et al. 2016, figure 6); a padding of zero on one side
// is a padding like any other, and the pair is saved as a pair — the text
// 0x3 would read as a hexadecimal number.
func TestUnitPairArguments(t *testing.T) {
	const file = `stackfit: 1
input: [8, 17, 17]
units:
  cb:
    params: {c: ~, k: 1, p: [0, 0]}
    layers:
      - {conv: $c, kernel: $k, pad: $p, bias: false}
      - {norm: batch}
layers:
  - {unit: cb, c: 16, k: [1, 7], p: [0, 3]}
  - {unit: cb, c: 16, k: [7, 1], p: [3, 0]}
  - {unit: cb, c: 4}
`
	s, err := Load([]byte(file))
	if err != nil {
		t.Fatal(err)
	}
	r := engine.Evaluate(s)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	for i, want := range []engine.Pair{{H: 1, W: 7}, {H: 7, W: 1}, engine.Square(1)} {
		c := s.Layers[i].Body[0]
		if c.Kernel != want || c.Pad.Size != (engine.Pair{H: (want.H - 1) / 2, W: (want.W - 1) / 2}) {
			t.Errorf("use %d: kernel %v pad %v, want kernel %v and the padding that keeps 17×17", i+1, c.Kernel, c.Pad.Size, want)
		}
	}
	if out := r.Rows[len(r.Rows)-1].Out; out != (engine.Shape{C: 4, H: 17, W: 17}) {
		t.Errorf("output %v, want 4×17×17", out)
	}
	data, err := Save(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"params: {c: ~, k: 1, p: [0, 0]}", "{unit: cb, c: 16, k: [1, 7], p: [0, 3]}", "{unit: cb, c: 16, k: [7, 1], p: [3, 0]}"} {
		if !strings.Contains(string(data), want) {
			t.Errorf("saved file lacks %q:\n%s", want, data)
		}
	}
	back, err := Load(data)
	if err != nil {
		t.Fatalf("%v\n%s", err, data)
	}
	if !engine.EqualLayers(back.Layers, s.Layers) {
		t.Error("reloaded stack differs")
	}
}
