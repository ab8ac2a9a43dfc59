package report

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
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

func analyze(t *testing.T, src []byte) *engine.Analysis {
	t.Helper()
	s, err := stackfile.Load(src)
	if err != nil {
		t.Fatal(err)
	}
	return engine.Analyze(s, s.Training, engine.DefaultAssumptions())
}

// compareWithReference checks that every layer line WriteJSON writes is
// the bytes encoding/json writes for BuildJSON's value of that layer, and
// that the whole report is valid JSON that decodes to BuildJSON's document.
func compareWithReference(t *testing.T, an *engine.Analysis) {
	t.Helper()
	var got bytes.Buffer
	if err := WriteJSON(&got, an); err != nil {
		t.Fatal(err)
	}
	doc := BuildJSON(an)
	lines := strings.Split(got.String(), "\n")
	const first = 4 // after "{", "name", "input" and `"layers": [`
	for i := range doc.Layers {
		want, err := json.Marshal(&doc.Layers[i])
		if err != nil {
			t.Fatal(err)
		}
		line := strings.TrimSuffix(strings.TrimPrefix(lines[first+i], "    "), ",")
		if line != string(want) {
			t.Fatalf("layer %d\ngot  %s\nwant %s", i, line, want)
		}
	}
	// The whole document: the same values as encoding/json's form of it.
	var gotDoc, wantDoc any
	if err := json.Unmarshal(got.Bytes(), &gotDoc); err != nil {
		t.Fatalf("the report is not valid JSON: %v", err)
	}
	wantJSON, err := json.Marshal(doc)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(wantJSON, &wantDoc); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(gotDoc, wantDoc) {
		t.Fatal("the report does not hold BuildJSON's document")
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
