package engine

import (
	"strings"
	"testing"
)

// TestCodeNames checks that every diagnostic code has a name of its own:
// the names are what stack files silence warnings by, so a code added
// without one, or two codes sharing one, would break that.
func TestCodeNames(t *testing.T) {
	seen := map[string]Code{}
	for c := ErrOutputSize; c <= ErrBranchFromSplit; c++ {
		n := c.Name()
		if n == "" {
			t.Errorf("code %d has no name", c)
			continue
		}
		if o, ok := seen[n]; ok {
			t.Errorf("codes %d and %d share the name %q", o, c, n)
		}
		seen[n] = c
	}
	if Code(255).Name() != "" {
		t.Error("an unknown code has a name")
	}
	for _, n := range WarningNames() {
		c, ok := WarningByName(n)
		if !ok || c.Name() != n {
			t.Errorf("WarningByName(%q) = %d, %v", n, c, ok)
		}
		r := &Result{}
		r.diag(Diagnostic{Severity: SevWarning, Code: c}) // a warning's code must be a warning's
		if r.Warnings != 1 {
			t.Errorf("%q counted as no warning", n)
		}
	}
	if _, ok := WarningByName("merge-unknown"); ok {
		t.Error("an error's name is offered as a warning to silence")
	}
}

// TestFinalReceptiveField checks when the small-receptive-field warning is
// given: only for a stack whose output is a single position (a classifier
// after global pooling); a stack that keeps a spatial map (a segmenter's
// per-pixel output) answers per position, each meant to see a part of the
// image (common practice in dense prediction).
func TestFinalReceptiveField(t *testing.T) {
	pad := func(l Layer) Layer { l.Pad.Size = Square(1); return l }
	stride := func(l Layer, s int64) Layer { l.Stride = Square(s); return l }
	tests := []struct {
		name   string
		in     int64
		layers []Layer
		want   bool
	}{
		{"per-pixel output keeps the map", 32, []Layer{pad(conv(8, 3)), pad(conv(8, 3)), conv(4, 1)}, false},
		{"strided down to one position", 8, []Layer{pad(conv(8, 3)), stride(conv(8, 3), 8)}, true},
		{"strided to one position, then flatten and dense", 8, []Layer{stride(conv(8, 3), 8), {Kind: KindFlatten}, {Kind: KindDense, Filters: 10}}, true},
		{"global pooling sees the whole map", 32, []Layer{pad(conv(8, 3)), {Kind: KindGlobalPool}}, false},
		{"2×2 output keeps a map", 8, []Layer{stride(conv(8, 3), 4)}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := Evaluate(&Stack{Input: Shape{C: 8, H: tt.in, W: tt.in}, Layers: tt.layers})
			got := false
			for _, d := range r.Diags {
				got = got || d.Code == WarnFinalRF
			}
			if got != tt.want {
				t.Errorf("warned = %v, want %v; output %v, diagnostics %+v", got, tt.want, r.Output, r.Diags)
			}
		})
	}
}

// TestQuiet checks that a stack's Quiet list silences exactly the named
// warnings, counts included, and leaves the others.
func TestQuiet(t *testing.T) {
	strided := conv(10, 3)
	strided.Stride = Square(8)
	layers := []Layer{conv(30, 1), strided} // channels-not-multiple-of-8 and small-receptive-field
	in := Shape{C: 3, H: 8, W: 8}
	codes := func(r *Result) map[Code]bool {
		m := map[Code]bool{}
		for _, d := range r.Diags {
			m[d.Code] = true
		}
		return m
	}
	loud := Evaluate(&Stack{Input: in, Layers: layers})
	if c := codes(loud); !c[WarnChannels8] || !c[WarnFinalRF] {
		t.Fatalf("the test stack lacks its warnings: %+v", loud.Diags)
	}
	quiet := Evaluate(&Stack{Input: in, Layers: layers, Quiet: []Code{WarnFinalRF}})
	c := codes(quiet)
	if c[WarnFinalRF] || !c[WarnChannels8] {
		t.Errorf("quiet small-receptive-field: got %+v", quiet.Diags)
	}
	if quiet.Warnings != loud.Warnings-1 {
		t.Errorf("warnings %d, want %d", quiet.Warnings, loud.Warnings-1)
	}
	// Errors are never silenced, even if a stack built in code names one.
	bad := Evaluate(&Stack{Input: in, Layers: []Layer{{Kind: KindConcat, From: "nowhere"}}, Quiet: []Code{ErrMergeUnknown}})
	if bad.Errors != 1 {
		t.Errorf("an error was silenced: %+v", bad.Diags)
	}
	// The result is reused: the next stack's list replaces the last one's.
	quiet.Evaluate(&Stack{Input: in, Layers: layers})
	if !codes(quiet)[WarnFinalRF] {
		t.Error("a reused result kept the previous stack's quiet list")
	}
}

// TestMergeUnknownSuggests checks that a misspelt merge name is answered
// with the earlier name it is likely a slip for, as a misspelt kind is.
func TestMergeUnknownSuggests(t *testing.T) {
	named := func(l Layer, n string) Layer { l.Name = n; return l }
	tests := []struct {
		name, from, want string
	}{
		{"one letter off", "skp1", `did you mean "skip1"?`},
		{"swapped letters", "sitem", `did you mean "stem"?`},
		{"nothing close", "zzzzzz", `no layer or block is named "zzzzzz"`},
		{"later layer is not offered", "tial", `no layer or block is named "tial"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := &Stack{Input: Shape{C: 8, H: 8, W: 8}, Layers: []Layer{
				named(conv(8, 1), "stem"), named(conv(8, 1), "skip1"),
				{Kind: KindConcat, From: tt.from}, named(conv(8, 1), "tail"),
			}}
			r := Evaluate(s)
			for _, d := range r.Diags {
				if d.Code == ErrMergeUnknown {
					if msg := d.Message(); !strings.Contains(msg, tt.want) {
						t.Errorf("message %q does not contain %q", msg, tt.want)
					}
					return
				}
			}
			t.Fatalf("no merge-unknown diagnostic: %+v", r.Diags)
		})
	}
}
