package report

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// The JSON report's layer lines are written by hand for speed. These tests
// hold them to the reference: Go's encoding/json marshalling the JSONLayer
// values BuildJSON makes (source: the encoding/json package documentation,
// "String values encode as JSON strings coerced to valid UTF-8, replacing
// invalid bytes with the Unicode replacement rune ... <, >, & ... U+2028
// and U+2029 are escaped", and its float encoding, which uses exponent
// notation outside 1e-6 ≤ |f| < 1e21).

// referenceJSON writes the report the slow way: every layer marshalled by
// encoding/json from BuildJSON's values.
func referenceJSON(t *testing.T, an *engine.Analysis) []byte {
	t.Helper()
	doc := BuildJSON(an)
	var b bytes.Buffer
	field := func(name string, v any, last bool) {
		data, err := json.Marshal(v)
		if err != nil {
			t.Fatal(err)
		}
		b.WriteString(`  "` + name + `": `)
		b.Write(data)
		if !last {
			b.WriteByte(',')
		}
		b.WriteByte('\n')
	}
	b.WriteString("{\n")
	field("name", doc.Name, false)
	field("input", doc.Input, false)
	b.WriteString(`  "layers": [`)
	for i := range doc.Layers {
		data, err := json.Marshal(&doc.Layers[i])
		if err != nil {
			t.Fatal(err)
		}
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString("\n    ")
		b.Write(data)
	}
	if len(doc.Layers) > 0 {
		b.WriteString("\n  ")
	}
	b.WriteString("],\n")
	field("totals", doc.Totals, false)
	field("errors", doc.Errors, false)
	field("warnings", doc.Warnings, false)
	field("memory", doc.Memory, false)
	field("fit", doc.Fit, true)
	b.WriteString("}\n")
	return b.Bytes()
}

func analyze(t *testing.T, src []byte) *engine.Analysis {
	t.Helper()
	s, err := stackfile.Load(src)
	if err != nil {
		t.Fatal(err)
	}
	return engine.Analyze(s, s.Training, engine.DefaultAssumptions())
}

func compareWithReference(t *testing.T, an *engine.Analysis) {
	t.Helper()
	var got bytes.Buffer
	if err := WriteJSON(&got, an); err != nil {
		t.Fatal(err)
	}
	want := referenceJSON(t, an)
	if !bytes.Equal(got.Bytes(), want) {
		g, w := strings.Split(got.String(), "\n"), strings.Split(string(want), "\n")
		for i := 0; i < min(len(g), len(w)); i++ {
			if g[i] != w[i] {
				t.Fatalf("line %d differs\ngot  %s\nwant %s", i+1, g[i], w[i])
			}
		}
		t.Fatalf("lengths differ: %d lines, want %d", len(g), len(w))
	}
	if !json.Valid(got.Bytes()) {
		t.Fatal("the report is not valid JSON")
	}
}

// TestWriteJSONMatchesEncodingJSON: every stack in testdata, written both
// ways, byte for byte.
func TestWriteJSONMatchesEncodingJSON(t *testing.T) {
	files, _ := filepath.Glob("../../testdata/*/*.yaml")
	if len(files) < 20 {
		t.Fatalf("found only %d stack files", len(files))
	}
	for _, f := range files {
		t.Run(filepath.Base(f), func(t *testing.T) {
			src, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			compareWithReference(t, analyze(t, src))
		})
	}
}

// TestWriteJSONHostileNames: names and diagnostics with every character
// class JSON escapes, on a stack with errors, warnings and notes.
func TestWriteJSONHostileNames(t *testing.T) {
	src := []byte(`stackfit: 1
name: x
input: [3, 32, 30]
training: {batch: 8, budget: 1GiB}
layers:
  - conv: 8
    kernel: 3
  - name: skip
    conv: 8
    kernel: 1
    stride: 3
  - pool: max
    kernel: 2
  - conv: 4
    kernel: 40
  - upsample: 2
  - dense: 10
`)
	an := analyze(t, src)
	names := []string{"<a&b>", "quote\" back\\slash", "\x00\x01\x1f\b\f\n\r\t", "ünï\u2028\u2029", "bad\xff\xfeutf8", "日本"}
	for i := range an.Stack.Layers {
		an.Stack.Layers[i].Name = names[i%len(names)]
	}
	an.Stack.Name = "<name>&\u2028"
	var sev [3]int
	for _, d := range an.Result.Diags {
		switch d.Severity {
		case engine.SevError:
			sev[0]++
		case engine.SevWarning:
			sev[1]++
		default:
			sev[2]++
		}
	}
	if sev[0] == 0 || sev[1] == 0 {
		t.Fatalf("the stack should have errors and warnings, has %v", sev)
	}
	compareWithReference(t, an)
}

func TestAppendStringMatchesEncodingJSON(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	cases := []string{"", "plain", "<>&", "\u2028\u2029", "\xff", "a\xe2\x80", "\x7f", "é", "\U0001F600"}
	for c := 0; c < 256; c++ {
		cases = append(cases, string([]byte{byte(c)}), "a"+string([]byte{byte(c)})+"z")
	}
	for n := 0; n < 2000; n++ {
		b := make([]byte, rng.IntN(12))
		for i := range b {
			b[i] = byte(rng.IntN(256))
		}
		cases = append(cases, string(b))
	}
	for _, s := range cases {
		want, _ := json.Marshal(s)
		if got := appendString(nil, s); string(got) != string(want) {
			t.Fatalf("%q: got %s, want %s", s, got, want)
		}
	}
}

func TestAppendFloatMatchesEncodingJSON(t *testing.T) {
	cases := []float64{0, math.Copysign(0, -1), 1, -1, 0.5, 0.25, 1.0 / 3, 3, 7, 427, 1e-6, 9.99e-7, 1e-7, 1e20, 1e21, 1.5e300,
		-2.5e-9, 123456789.125, 1<<53 - 1, 1 << 53, -(1<<53 - 1), 1e15, 999999999999999, math.MaxInt64, math.SmallestNonzeroFloat64, math.MaxFloat64}
	rng := rand.New(rand.NewPCG(3, 4))
	for n := 0; n < 2000; n++ {
		cases = append(cases, math.Float64frombits(rng.Uint64()))
	}
	for _, f := range cases {
		want, err := json.Marshal(f)
		got, gerr := appendFloat(nil, f)
		if (err != nil) != (gerr != nil) {
			t.Fatalf("%v: error %v, want %v", f, gerr, err)
		}
		if err == nil && string(got) != string(want) {
			t.Fatalf("%v: got %s, want %s", f, got, want)
		}
	}
}
