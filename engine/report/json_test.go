package report

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// WriteJSON streams the document BuildJSON builds, one layer per line.
// These tests hold the two together: each layer line is encoding/json's
// form of BuildJSON's value for that layer, and the whole printout decodes
// to BuildJSON's document.

func analyze(t *testing.T, src []byte) *engine.Analysis {
	t.Helper()
	s, err := stackfile.Load(src)
	if err != nil {
		t.Fatal(err)
	}
	return engine.Analyze(s, s.Training, engine.DefaultAssumptions())
}

// compareWithReference checks that every layer line WriteJSON writes is
// encoding/json's form of BuildJSON's value of that layer (with the C1
// and bidirectional controls escaped), and that the
// whole report is valid JSON that decodes to BuildJSON's document.
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
		want = escapeInvisible(want) // what WriteJSON escapes besides
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

// TestWriteJSONMatchesBuildJSON: every stack in testdata, written both
// ways.
func TestWriteJSONMatchesBuildJSON(t *testing.T) {
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

// TestWriteJSONEscapesInvisible: C1 controls (ECMA-48's C1 set: U+009B is
// CSI, U+009D OSC, U+0085 next line) and the bidirectional controls of
// Unicode's bidirectional algorithm (UAX #9: LRM, RLM, ALM, the embeddings
// and overrides U+202A–U+202E, the isolates U+2066–U+2069) in a stack
// name, a layer name and a diagnostic come out as \uXXXX escapes, never
// raw, and the report decodes (encoding/json) to the very same strings.
func TestWriteJSONEscapesInvisible(t *testing.T) {
	tests := []struct {
		name, raw, escaped string
	}{
		{"CSI", "a\u009b2Jb", `a\u009b2Jb`},
		{"next line", "a\u0085b", `a\u0085b`},
		{"C1 ends", "\u0080\u009f", `\u0080\u009f`},
		{"OSC", "\u009d0;x\u009c", `\u009d0;x\u009c`},
		{"right-to-left override", "abc\u202Etxt.exe", `abc\u202etxt.exe`},
		{"embeddings", "\u202a\u202b\u202c\u202d", `\u202a\u202b\u202c\u202d`},
		{"isolates", "\u2066\u2067\u2068\u2069", `\u2066\u2067\u2068\u2069`},
		{"marks", "\u200e\u200f\u061c", `\u200e\u200f\u061c`},
		{"beside plain text", "日本\u202eü\u00a0", `日本\u202eü` + "\u00a0"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			an := analyze(t, []byte("stackfit: 1\nname: x\ninput: [3, 8, 8]\nlayers:\n  - conv: 4\n    kernel: 3\n  - add: nowhere\n"))
			an.Stack.Name = tt.raw
			an.Stack.Layers[0].Name = tt.raw
			an.Stack.Layers[1].From = tt.raw // the error quotes it
			var out bytes.Buffer
			if err := WriteJSON(&out, an); err != nil {
				t.Fatal(err)
			}
			got := out.String()
			if i := invisibleAt(out.Bytes()); i >= 0 {
				t.Errorf("a control is left raw at byte %d: %q", i, got[i:min(i+12, len(got))])
			}
			if !strings.Contains(got, `"name": "`+tt.escaped+`"`) || !strings.Contains(got, `"name":"`+tt.escaped+`"`) {
				t.Errorf("no escaped %s in\n%s", tt.escaped, got)
			}
			var doc JSON
			if err := json.Unmarshal(out.Bytes(), &doc); err != nil {
				t.Fatalf("not valid JSON: %v", err)
			}
			if doc.Name != tt.raw || doc.Layers[0].Name != tt.raw {
				t.Errorf("decodes to %q, %q; want %q", doc.Name, doc.Layers[0].Name, tt.raw)
			}
			compareWithReference(t, an)
		})
	}
}
