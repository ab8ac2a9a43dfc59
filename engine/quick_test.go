package engine_test

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// TestQuickRoundTrip checks that every layer of every shipped stack file,
// written as a quick-entry line by Summary, reads back as the same layer.
func TestQuickRoundTrip(t *testing.T) {
	files, _ := filepath.Glob("../testdata/*/*.yaml")
	n := 0
	var walk func([]engine.Layer)
	walk = func(ls []engine.Layer) {
		for _, l := range ls {
			want := l
			want.Name, want.Note, want.Body = "", "", nil
			line := engine.Summary(&l)
			got, err := engine.ParseQuick(line)
			if err != nil {
				t.Errorf("%q: %v", line, err)
			} else if !reflect.DeepEqual(got, want.Normalized()) {
				t.Errorf("%q read back as %+v, want %+v", line, got, want)
			}
			n++
			walk(l.Body)
		}
	}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		s, err := stackfile.Load(data)
		if err != nil {
			t.Fatalf("%s: %v", f, err)
		}
		walk(s.Layers)
	}
	if n < 200 {
		t.Errorf("only %d layers checked", n)
	}
}

func TestQuickParse(t *testing.T) {
	tests := []struct {
		line string
		want engine.Layer
	}{
		{"conv 64 k3 s2 p1 @Stem", engine.Layer{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3), Stride: engine.Square(2), Pad: engine.Padding{Size: engine.Square(1)}, Name: "Stem"}},
		{"conv 32 k3x5 same dw nobias", engine.Layer{Kind: engine.KindConv, Filters: 32, Kernel: engine.Pair{H: 3, W: 5}, Pad: engine.Padding{Mode: engine.PadSame}, Depthwise: true, NoBias: true}},
		{"act leaky-relu 0.2", engine.Layer{Kind: engine.KindAct, Act: engine.ActLeakyReLU, Slope: 0.2}},
		{"global-pool", engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg}},
		{"block 3 residual then relu", engine.Layer{Kind: engine.KindBlock, Repeat: 3, Residual: true, PostAct: engine.ActReLU, HasPostAct: true}},
		{"concat Skip1 crop", engine.Layer{Kind: engine.KindConcat, From: "Skip1", Crop: true}},
		{"  DENSE   10  ", engine.Layer{Kind: engine.KindDense, Filters: 10}},
		{"act hard-swish", engine.Layer{Kind: engine.KindAct, Act: engine.ActHardSwish}},
		{"scale 1e-6", engine.Layer{Kind: engine.KindScale, ScaleInit: 1e-6}},
		{"scale", engine.Layer{Kind: engine.KindScale, ScaleInit: 1}},
		{"shuffle g2", engine.Layer{Kind: engine.KindShuffle, Groups: 2}},
		{"shuffle 3 @mix", engine.Layer{Kind: engine.KindShuffle, Groups: 3, Name: "mix"}},
		{"shuffle g1", engine.Layer{Kind: engine.KindShuffle}},
		{"to-space 2", engine.Layer{Kind: engine.KindToSpace, PixelFactor: 2}},
		{"to-channels 3 @down", engine.Layer{Kind: engine.KindToChannels, PixelFactor: 3, Name: "down"}},
		{"keep 16", engine.Layer{Kind: engine.KindKeep, Keep: 16}},
		{"act mish", engine.Layer{Kind: engine.KindAct, Act: engine.ActMish}},
		{"act softmax", engine.Layer{Kind: engine.KindAct, Act: engine.ActSoftmax}},
		{"act prelu", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU}},
		{"act prelu per-channel", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: true}},
		{"act prelu 0.1 per-channel", engine.Layer{Kind: engine.KindAct, Act: engine.ActPReLU, PerChannel: true, Slope: 0.1}},
		{"block 2 residual then mish", engine.Layer{Kind: engine.KindBlock, Repeat: 2, Residual: true, PostAct: engine.ActMish, HasPostAct: true}},
		{"spatial-gate", engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(7)}},
		{"spatial-gate k3 nobias batch-norm", engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(3), NoBias: true, GateNorm: true}},
		{"spatial-gate 5", engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(5)}},
	}
	for _, tt := range tests {
		got, err := engine.ParseQuick(tt.line)
		if err != nil || !reflect.DeepEqual(got, tt.want) {
			t.Errorf("%q: %+v, %v; want %+v", tt.line, got, err, tt.want)
		}
	}
}

// TestQuickErrors checks each unreadable line gets a message that says
// what to write instead.
func TestQuickErrors(t *testing.T) {
	tests := []struct{ line, want string }{
		{"", "empty; start with a kind"},
		{"cnv 64 k3", `unknown kind "cnv"`},
		{"den 10", `unknown kind "den"; did you mean "dense"?`},
		{"conv k3", "conv needs a filter count"},
		{"conv 64", "conv needs a kernel; add k3"},
		{"conv 64 k0", `kernel: "0" is not valid`},
		{"conv 64 k3 ceil", `"ceil" does not apply to conv`},
		{"dropout 1.5", "give a number at least 0 and below 1"},
		{"norm group", "group norm needs groups; add g32"},
		{"reshape 4x4", "give channels×height×width"},
		{"conv 99999999999999999999 k3", "give a whole number from 1 to 16777216"},
		{"conv 64 k3 @9bad", `"9bad" is not a layer name`},
		{"block 2 then relu", `"then relu" follows a residual addition; add residual`},
		{"shuffle", "shuffle needs a group count, e.g. shuffle g2"},
		{"shuffle g0", "give a whole number from 1 to 16777216"},
		{"scale 1e7", "give a number from 0 and below 1e6, e.g. 1e-6"},
	}
	for _, tt := range tests {
		_, err := engine.ParseQuick(tt.line)
		if err == nil || !errors.Is(err, engine.ErrQuick) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%q: %v, want %q", tt.line, err, tt.want)
		}
	}
}

// TestQuickDidYouMean: a slip in the kind, in a main word (activation,
// pool mode, norm type) or in an option word gets the nearest word by edit
// distance, and the names practitioners type from frameworks and papers
// get stackfit's word (lrelu for PyTorch's LeakyReLU, swish for SiLU as
// Ramachandran et al. 2017 name it, fc and linear for dense).
func TestQuickDidYouMean(t *testing.T) {
	tests := []struct{ line, want string }{
		{"covn 32 k3", `unknown kind "covn"; did you mean "conv"?`},
		{"desne 10", `unknown kind "desne"; did you mean "dense"?`},
		{"fc 10", `unknown kind "fc"; did you mean "dense"?`},
		{"linear 10", `unknown kind "linear"; did you mean "dense"?`},
		{"act lrelu", `unknown act function "lrelu"; did you mean "leaky-relu"?`},
		{"act lrelu 0.2", `unknown act function "lrelu"; did you mean "leaky-relu"?`},
		{"act swish", `unknown act function "swish"; did you mean "silu"?`},
		{"act rleu", `unknown act function "rleu"; did you mean "relu"?`},
		{"act hardswish", `unknown act function "hardswish"; did you mean "hard-swish"?`},
		{"pool mx k2", `unknown pool mode "mx"; did you mean "max"?`},
		{"norm btach", `unknown norm type "btach"; did you mean "batch"?`},
		{"norm bn", `unknown norm type "bn"; did you mean "batch"?`},
		{"norm gn g32", `unknown norm type "gn"; did you mean "group"?`},
		{"upsample 2 bilinaer", `"bilinaer" does not apply to upsample; did you mean "bilinear"?`},
		{"global-pool mx", `"mx" does not apply to global-pool; did you mean "max"?`},
		{"conv 64 k3 nobais", `"nobais" does not apply to conv; did you mean "nobias"?`},
		{"block 2 residual then lrelu", `give none or one of relu, leaky-relu, gelu, silu, sigmoid, tanh, relu6, hard-swish, hard-sigmoid, mish, softmax, prelu; did you mean "leaky-relu"?`},
		// Nothing close: no guess, the list or the help instead.
		{"act zzzzzz", "act needs a function: relu, leaky-relu"},
		{"conv 64 k3 qqqq", `"qqqq" does not apply to conv; see the help (?) for its options`},
	}
	for _, tt := range tests {
		_, err := engine.ParseQuick(tt.line)
		if err == nil || !errors.Is(err, engine.ErrQuick) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%q: %v, want %q", tt.line, err, tt.want)
		}
	}
}

// TestSuggest: the one suggester behind every "did you mean": aliases
// first, then edit distance within one edit per four letters (common
// practice for typo hints), nothing when nothing is close.
func TestSuggest(t *testing.T) {
	acts := engine.SpecOf(engine.KindAct).Main.Choices
	var kinds []string
	for _, k := range engine.Kinds() {
		kinds = append(kinds, k.String())
	}
	tests := []struct {
		s          string
		candidates []string
		want       string
	}{
		{"lrelu", acts, "leaky-relu"}, // an alias beats relu at distance 1
		{"LReLU", acts, "leaky-relu"}, // case does not matter
		{"relu6", acts, "relu6"},
		{"gleu", acts, "gelu"},              // a swap of neighbours costs one
		{"lrelu", []string{"relu"}, "relu"}, // an alias whose word is no candidate falls back to distance
		{"bathc", []string{"batch", "group"}, "batch"},
		{"xyz", acts, ""},
		{"", acts, ""},
		{"PixelShuffle", kinds, "to-space"},      // PyTorch's module name
		{"space-to-depth", kinds, "to-channels"}, // ONNX's operator
		{"slice", kinds, "keep"},
		{"PReLu", acts, "prelu"},           // PyTorch's nn.PReLU, case aside
		{"parametric-relu", acts, "prelu"}, // He et al. 2015's name
		{"Softmax2d", acts, "softmax"},     // PyTorch's nn.Softmax2d
	}
	for _, tt := range tests {
		if got := engine.Suggest(tt.s, tt.candidates); got != tt.want {
			t.Errorf("Suggest(%q) = %q, want %q", tt.s, got, tt.want)
		}
	}
}

// TestFieldsRoundTrip checks that every field reads back what it writes.
func TestFieldsRoundTrip(t *testing.T) {
	for _, k := range engine.Kinds() {
		l, err := engine.ParseQuick(engine.SpecOf(k).Example)
		if err != nil {
			t.Fatalf("%v: the example %q does not parse: %v", k, engine.SpecOf(k).Example, err)
		}
		for _, f := range engine.FieldsFor(k) {
			v := f.Get(&l)
			if v == "" && f.Key == "from" {
				continue // a merge starts without a name; the form asks for one
			}
			c := l
			if err := f.Set(&c, v); err != nil {
				t.Errorf("%v.%s: Set(Get()=%q): %v", k, f.Key, v, err)
			}
			if f.Get(&c) != v {
				t.Errorf("%v.%s: %q became %q", k, f.Key, v, f.Get(&c))
			}
		}
		if err := engine.FieldsFor(k)[0].Set(&l, "§"); err != nil && !errors.Is(err, engine.ErrField) {
			t.Errorf("%v: error %v is not a field error", k, err)
		}
	}
}
