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
// encoding/json's form of BuildJSON's value of that layer, and that the
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
