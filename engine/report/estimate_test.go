package report

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	"stackfit/engine"
)

// A stack whose third layer has an error (a 99×99 kernel on a 32×32 map):
// the memory rows past it count nothing, so its partial totals fit any
// budget. Every printout must say the memory is not estimated instead.
const brokenStack = `stackfit: 1
name: cap inspector draft
input: [3, 32, 32]
training: {batch: 8, budget: 24GiB}
layers:
  - {conv: 8, kernel: 3, pad: 1}
  - {conv: 64, kernel: 3, pad: 1}
  - {conv: 8, kernel: 99}
  - {conv: 512, kernel: 3}
`

// A stack with a budget and no layers: nothing to train, so no verdict and
// no largest batch (the batch solver's "none" would read as "nothing fits").
const emptyStack = `stackfit: 1
name: blank
input: [3, 32, 32]
training: {batch: 8, budget: 24GiB}
layers: []
`

// The same stack without its broken layers: a real estimate with a verdict.
const cleanStack = `stackfit: 1
name: cap inspector draft
input: [3, 32, 32]
training: {batch: 8, budget: 24GiB}
layers:
  - {conv: 8, kernel: 3, pad: 1}
  - {conv: 64, kernel: 3, pad: 1}
`

// TestReportsSayNotEstimated: with errors, the text and markdown reports
// give "memory not estimated: the stack has 1 error(s)" in place of the
// memory figures and the verdict, and no share-of-parameters warning; the
// clean stack keeps its verdict.
func TestReportsSayNotEstimated(t *testing.T) {
	const line = "memory not estimated: the stack has 1 error(s)"
	tests := []struct {
		name    string
		src     string
		write   func(*bytes.Buffer, *engine.Analysis) error
		want    []string
		notWant []string
	}{
		{"text, errors", brokenStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteText(b, an) },
			[]string{"training memory per GPU · batch 8", line + "; fix them (listed below) for an estimate"},
			[]string{"fits", "left", "— estimate", "inference alone", "holds", "weights"}},
		{"markdown, errors", brokenStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteMarkdown(b, an) },
			[]string{"**Training memory per GPU** at batch 8 on 1 GPU(s), fp32, sgd: " + line, "**Diagnostics**", "kernel height spans 99"},
			[]string{"fits", "| category | size |", "holds"}},
		{"text, empty", emptyStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteText(b, an) },
			[]string{"memory not estimated: the stack is empty; add a layer for an estimate\n"},
			[]string{"fits", "batch none", "peak in", "fix them", "nowhere"}},
		{"markdown, empty", emptyStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteMarkdown(b, an) },
			[]string{"fp32, sgd: memory not estimated: the stack is empty; add a layer for an estimate."},
			[]string{"fits", "Largest batch", "fix them", "nowhere"}},
		{"csv, empty", emptyStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteCSV(b, an) },
			nil, []string{"fits", "none", "nowhere"}},
		{"text, clean", cleanStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteText(b, an) },
			[]string{"training memory per GPU — estimate", "→ fits;", "fits at most: batch"},
			[]string{"not estimated"}},
		{"markdown, clean", cleanStack, func(b *bytes.Buffer, an *engine.Analysis) error { return WriteMarkdown(b, an) },
			[]string{"**Training memory per GPU (estimate)**", "kept free: fits."},
			[]string{"not estimated"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := tt.write(&b, analyze(t, []byte(tt.src))); err != nil {
				t.Fatal(err)
			}
			out := b.String()
			for _, w := range tt.want {
				if !strings.Contains(out, w) {
					t.Errorf("lacks %q:\n%s", w, out)
				}
			}
			for _, w := range tt.notWant {
				if strings.Contains(out, w) {
					t.Errorf("has %q:\n%s", w, out)
				}
			}
		})
	}
}

// TestJSONNotEstimated: with errors, or with no layers, the JSON report
// keeps every memory field, adds estimated: false with the reason, and
// gives fits false and fit null (not fits true beside a largest batch of 0); a clean stack gives estimated true, an empty reason and its
// answers. The streamed report holds the same document.
func TestJSONNotEstimated(t *testing.T) {
	tests := []struct {
		name      string
		src       string
		estimated bool
		reason    string
		fits      bool
		fit       bool
	}{
		{"errors", brokenStack, false, "the stack has 1 error(s)", false, false},
		{"empty", emptyStack, false, "the stack is empty; add a layer for an estimate", false, false},
		{"clean", cleanStack, true, "", true, true},
	}
	fields := []string{"estimate", "estimated", "reason", "setup", "weights", "gradients", "optimizer", "activations",
		"workspace", "overhead", "total", "budget", "reserve", "fits", "inference", "assumptions"}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			an := analyze(t, []byte(tt.src))
			compareWithReference(t, an)
			var b bytes.Buffer
			if err := WriteJSON(&b, an); err != nil {
				t.Fatal(err)
			}
			var doc struct {
				Memory map[string]any `json:"memory"`
				Fit    *JSONFit       `json:"fit"`
			}
			if err := json.Unmarshal(b.Bytes(), &doc); err != nil {
				t.Fatal(err)
			}
			for _, f := range fields {
				if _, ok := doc.Memory[f]; !ok {
					t.Errorf("memory lacks %q", f)
				}
			}
			if doc.Memory["estimated"] != tt.estimated || doc.Memory["reason"] != tt.reason || doc.Memory["fits"] != tt.fits || (doc.Fit != nil) != tt.fit {
				t.Errorf("estimated %v, reason %q, fits %v, fit %v; want %v, %q, %v, fit %v",
					doc.Memory["estimated"], doc.Memory["reason"], doc.Memory["fits"], doc.Fit, tt.estimated, tt.reason, tt.fits, tt.fit)
			}
		})
	}
}
