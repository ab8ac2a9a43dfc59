package stackfile

import (
	"errors"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
)

// TestDefaultsRoundTrip checks the defaults section: what is read, and
// that the canonical form saves and reloads identically. The eps of
// 0.001 is the one torchvision's Inception v3 and GoogLeNet give every
// batch norm (BasicConv2d in their model source); bias: false is the
// convolution followed by a norm (common practice).
func TestDefaultsRoundTrip(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\n"
	tests := []struct {
		name  string
		src   string
		want  engine.Defaults
		saved string // a line of the canonical form
	}{
		{"norm eps", head + "defaults:\n  norm: {eps: 0.001}\nlayers: [{norm: batch}]\n",
			engine.Defaults{{Kind: engine.KindNorm, Eps: 0.001}}, "defaults:\n  norm: {eps: 0.001}\n"},
		{"kinds in kind order", head + "defaults:\n  act: {slope: 0.2}\n  norm: {eps: 0.001}\n  conv: {bias: false}\nlayers: []\n",
			engine.Defaults{{Kind: engine.KindConv, NoBias: true}, {Kind: engine.KindNorm, Eps: 0.001}, {Kind: engine.KindAct, Slope: 0.2}},
			"defaults:\n  conv: {bias: false}\n  norm: {eps: 0.001}\n  act: {slope: 0.2}\n"},
		{"bias yes is kept", head + "defaults: {dense: {bias: true}}\nlayers: []\n",
			engine.Defaults{{Kind: engine.KindDense, BiasOn: true}}, "  dense: {bias: true}\n"},
		{"an eps of 0 sets nothing", head + "defaults: {norm: {eps: 0}}\nlayers: []\n", nil, "layers: []\n"},
		{"empty section", head + "defaults: {}\nlayers: []\n", nil, "layers: []\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Load([]byte(tt.src))
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(s.Defaults, tt.want) {
				t.Errorf("Defaults = %+v, want %+v", s.Defaults, tt.want)
			}
			out, err := Save(s)
			if err != nil {
				t.Fatal(err)
			}
			if !strings.Contains(string(out), tt.saved) {
				t.Errorf("saved form lacks %q:\n%s", tt.saved, out)
			}
			back, err := Load(out)
			if err != nil {
				t.Fatalf("saved form does not load: %v\n%s", err, out)
			}
			again, _ := Save(back)
			if string(again) != string(out) || !reflect.DeepEqual(back.Defaults, s.Defaults) {
				t.Errorf("not identical after a reload:\n%s\n---\n%s", out, again)
			}
		})
	}
}

// TestDefaultsLayersKeepWhatTheyWrite checks the rule for a layer's own
// value: it is kept as written, even when it equals the file's default or
// the kind's (PyTorch's 1e-5 eps, torch.nn.BatchNorm2d's documentation),
// so it stays put when the default changes; a layer that writes nothing
// saves with nothing.
func TestDefaultsLayersKeepWhatTheyWrite(t *testing.T) {
	src := `stackfit: 1
input: [3, 8, 8]
defaults:
  conv: {bias: false}
  norm: {eps: 0.001}
layers:
  - {conv: 8, kernel: 3}
  - {conv: 8, kernel: 3, bias: true}
  - {conv: 8, kernel: 3, bias: false}
  - {norm: batch}
  - {norm: batch, eps: 0.001}
  - {norm: batch, eps: 1.0e-05}
`
	s, err := Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	out, err := Save(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, line := range []string{
		"  - {conv: 8, kernel: 3}\n", "  - {conv: 8, kernel: 3, bias: true}\n", "  - {conv: 8, kernel: 3, bias: false}\n",
		"  - {norm: batch}\n", "  - {norm: batch, eps: 0.001}\n", "  - {norm: batch, eps: 1e-05}\n",
	} {
		if !strings.Contains(string(out), line) {
			t.Errorf("saved form lacks %q:\n%s", line, out)
		}
	}
	r0 := engine.Evaluate(s)
	if bias := []bool{!r0.Rows[0].Layer.NoBias, !r0.Rows[1].Layer.NoBias, !r0.Rows[2].Layer.NoBias}; !reflect.DeepEqual(bias, []bool{false, true, false}) {
		t.Errorf("bias with the file's default = %v, want [false true false]", bias)
	}
	// Changing the default changes the layers that do not write the field.
	s.Defaults = engine.Defaults{{Kind: engine.KindNorm, Eps: 0.01}}
	r := engine.Evaluate(s)
	eps := []float64{r.Rows[3].Layer.Eps, r.Rows[4].Layer.Eps, r.Rows[5].Layer.Eps}
	if want := []float64{0.01, 0.001, 1e-5}; !reflect.DeepEqual(eps, want) {
		t.Errorf("eps after changing the default = %v, want %v", eps, want)
	}
	if r.Rows[0].Layer.NoBias || r.Rows[1].Layer.NoBias {
		t.Errorf("bias after removing the conv default: %v %v, want on on", !r.Rows[0].Layer.NoBias, !r.Rows[1].Layer.NoBias)
	}
}

// TestDefaultsErrors checks that every wrong entry names the field and
// the fix.
func TestDefaultsErrors(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\nlayers: []\n"
	tests := []struct {
		name     string
		src      string
		sentinel error
		msg      string
	}{
		{"unknown kind with a hint", head + "defaults: {nrom: {eps: 0.001}}\n", ErrUnknown,
			`4:12: defaults: unknown layer kind "nrom"; did you mean "norm"? (defaults are for conv, deconv, norm, act, dense, spatial-gate)`},
		{"kind with nothing to default", head + "defaults: {pool: {kernel: 2}}\n", ErrUnknown,
			`4:12: defaults: defaults are for the kinds conv, deconv, norm, act, dense and spatial-gate; remove pool from defaults`},
		{"field of another kind", head + "defaults: {norm: {bias: false}}\n", ErrUnknown,
			`4:19: defaults → norm: "bias": a norm default may set eps`},
		{"field that differs per layer", head + "defaults: {conv: {kernel: 3}}\n", ErrType,
			`4:19: defaults → conv: "kernel": a conv default may set bias; kernel differs from layer to layer, so write it on each conv layer`},
		{"misspelt field", head + "defaults: {norm: {esp: 0.001}}\n", ErrUnknown,
			`4:19: defaults → norm: "esp": a norm default may set eps; did you mean "eps"?`},
		{"bad value", head + "defaults: {norm: {eps: 2}}\n", ErrRange,
			`4:24: defaults → norm → eps: 2 is out of range; it must be at least 0 and below 1`},
		{"wrong type", head + "defaults: {conv: {bias: maybe}}\n", ErrType,
			`4:25: defaults → conv → bias: expected true or false, found the text "maybe"`},
		{"not a mapping", head + "defaults: [norm]\n", ErrType,
			`4:11: defaults: expected kinds with their defaults, e.g. norm: {eps: 0.001}`},
		{"fields not a mapping", head + "defaults: {norm: 0.001}\n", ErrType,
			`4:18: defaults → norm: expected fields with their values, e.g. {eps: 0.001}`},
		{"kind twice", head + "defaults: {norm: {eps: 0.001}, norm: {eps: 0.01}}\n", ErrType,
			`4:32: defaults: key "norm" appears twice; keep one`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Load([]byte(tt.src))
			if err == nil {
				t.Fatal("no error")
			}
			if !errors.Is(err, tt.sentinel) {
				t.Errorf("error %v does not wrap %v", err, tt.sentinel)
			}
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T is not an ErrorList", err)
			}
			if got := list[0].Error(); !strings.HasPrefix(got, tt.msg) {
				t.Errorf("got  %s\nwant %s", got, tt.msg)
			}
		})
	}
}

// TestWidthFormsRoundTrip checks the input-relative width and the group
// width in a file: read, saved canonically and read back, and refused
// where they do not apply.
func TestWidthFormsRoundTrip(t *testing.T) {
	const head = "stackfit: 1\ninput: [16, 8, 8]\nlayers:\n"
	tests := []struct {
		name, item, saved, err string
	}{
		{"depthwise at the input's width", "  - {conv: x1, kernel: 3, pad: 1, groups: depthwise, relative-to: input}\n",
			"{conv: x1, kernel: 3, pad: 1, groups: depthwise, relative-to: input}", ""},
		{"group width", "  - {conv: 16, kernel: 3, pad: 1, group-width: 8}\n", "{conv: 16, kernel: 3, pad: 1, group-width: 8}", ""},
		{"group width with groups", "  - {conv: 16, kernel: 3, groups: 2, group-width: 8}\n", "",
			"group-width (from 1) sets the groups itself; remove groups, or remove group-width"},
		{"input needs a relative width", "  - {conv: 16, kernel: 3, relative-to: input}\n", "",
			"relative-to needs a relative width such as x6 or /4"},
		{"unknown relative-to", "  - {conv: x1, kernel: 3, relative-to: inptu}\n", "",
			`"inptu" is not one of body, block, input; did you mean "input"?`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Load([]byte(head + tt.item))
			if tt.err != "" {
				if err == nil || !strings.Contains(err.Error(), tt.err) {
					t.Fatalf("error %v, want one containing %q", err, tt.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			out, err := Save(s)
			if err != nil || !strings.Contains(string(out), tt.saved) {
				t.Fatalf("saved (%v):\n%s\nwant %s", err, out, tt.saved)
			}
			back, err := Load(out)
			if err != nil || !back.Layers[0].Equal(&s.Layers[0]) {
				t.Errorf("reload: %v, %+v", err, back)
			}
		})
	}
}

// TestDefaultsCommentKept checks that saving over a file keeps a comment
// on its defaults section.
func TestDefaultsCommentKept(t *testing.T) {
	old := []byte("stackfit: 1\ninput: [3, 8, 8]\n# torchvision's BasicConv2d norms\ndefaults:\n  norm: {eps: 0.001}\nlayers: [{norm: batch}]\n")
	s, err := Load(old)
	if err != nil {
		t.Fatal(err)
	}
	s.Name = "n"
	kept, err := SaveOver(old, s)
	if err != nil || !strings.Contains(string(kept), "# torchvision's BasicConv2d norms\ndefaults:\n  norm: {eps: 0.001}\n") {
		t.Errorf("the section or its comment was lost: %v\n%s", err, kept)
	}
}
