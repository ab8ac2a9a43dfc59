package stackfile

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/examples"
)

// TestRoundTrip checks load → save → load gives the same stack and that
// saving is stable (save → load → save gives the same bytes), for every
// stack file the project ships.
func TestRoundTrip(t *testing.T) {
	files, _ := filepath.Glob("../../testdata/*/*.yaml")
	if len(files) == 0 {
		t.Fatal("no stack files found under testdata")
	}
	inputs := map[string][]byte{"example": examples.FruitGrader()}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		inputs[f] = data
	}
	for name, data := range inputs {
		t.Run(name, func(t *testing.T) {
			s1, err := Load(data)
			if err != nil {
				t.Fatal(err)
			}
			b1, err := Save(s1)
			if err != nil {
				t.Fatal(err)
			}
			s2, err := Load(b1)
			if err != nil {
				t.Fatalf("reload: %v\n%s", err, b1)
			}
			if !reflect.DeepEqual(s1, s2) {
				t.Errorf("reloaded stack differs:\n%+v\n%+v", s1, s2)
			}
			b2, _ := Save(s2)
			if !bytes.Equal(b1, b2) {
				t.Errorf("save is not stable:\n%s\n---\n%s", b1, b2)
			}
		})
	}
}

// TestEveryField round-trips a stack that sets every optional field.
func TestEveryField(t *testing.T) {
	src := `stackfit: 1
name: all fields
note: "two\nlines"
input: [3, 33, 47]
training: {batch: 32, precision: bf16-mixed, optimizer: adamw, budget: 24GiB, gpus: 8, shard: gradients,
  accumulate: 2, checkpoint: 4, workspace: 1GiB, overhead: 600MiB, headroom: 12.5%}
stage: {cap: 256, layers: 1, kernel: 5, bias: false, norm: group, groups: 8, act: leaky-relu, slope: 0.2}
layers:
  - {conv: 32, kernel: [3, 5], stride: [1, 2], pad: [1, 2], dilation: 2, groups: 1, bias: false, name: stem, note: first}
  - {conv: 32, kernel: 3, groups: depthwise, pad: same}
  - {conv: 64, kernel: 1, groups: 4, pad: valid}
  - {deconv: 32, kernel: 4, stride: 2, pad: 1, out-pad: [0, 1]}
  - {pool: avg, kernel: 3, stride: 2, pad: 1, ceil: true}
  - {upsample: [2, 1], mode: bilinear}
  - {norm: group, groups: 8}
  - {norm: instance, affine: true}
  - {norm: layer, affine: false}
  - {act: leaky-relu, slope: 0.2}
  - {act: hard-swish}
  - {scale: 1e-6}
  - scale
  - {shuffle: 2}
  - {dropout: 0.25}
  - {pool-to: [4, 5]}
  - flatten
  - {dense: 64, bias: false}
  - {reshape: [4, 4, 4]}
  - global-pool
  - {global-pool: max}
  - spatial-gate
  - {spatial-gate: 3, bias: false, batch-norm: true}
`
	s, err := Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	want := engine.Layer{Kind: engine.KindConv, Name: "stem", Note: "first", Filters: 32, Kernel: engine.Pair{H: 3, W: 5},
		Stride: engine.Pair{H: 1, W: 2}, Pad: engine.Padding{Size: engine.Pair{H: 1, W: 2}}, Dilation: engine.Square(2), NoBias: true}
	if !reflect.DeepEqual(s.Layers[0], want) {
		t.Errorf("layer 1 = %+v\nwant %+v", s.Layers[0], want)
	}
	if tr := s.Training; tr.Batch != 32 || tr.Precision != engine.BF16Mixed || tr.Optimizer != engine.AdamW || tr.Budget != 24<<30 ||
		tr.GPUs != 8 || tr.Shard != engine.ShardGradients || tr.Accumulate != 2 || tr.Checkpoint != 4 || tr.Workspace != 1<<30 ||
		tr.Overhead != 600<<20 || !tr.HeadroomSet || tr.Headroom != 0.125 {
		t.Errorf("training = %+v", tr)
	}
	if st := s.Stage; st != (engine.Stage{Cap: 256, Layers: 1, LayersSet: true, Kernel: 5, Bias: engine.Off, Norm: engine.NormGroup, NormSet: true,
		Groups: 8, Act: engine.ActLeakyReLU, ActSet: true, Slope: 0.2}) {
		t.Errorf("stage = %+v", st)
	}
	if !s.Layers[1].Depthwise || s.Layers[1].Pad.Mode != engine.PadSame || s.Layers[2].Pad.Mode != engine.PadValid {
		t.Errorf("depthwise/same/valid not read: %+v %+v", s.Layers[1], s.Layers[2])
	}
	// A bare scale starts its factors at 1 and saves the value written out.
	if l := s.Layers[11]; l.Kind != engine.KindScale || l.ScaleInit != 1e-6 || s.Layers[12].ScaleInit != 1 || s.Layers[13].Groups != 2 {
		t.Errorf("scale/shuffle not read: %+v %+v %+v", l, s.Layers[12], s.Layers[13])
	}
	// A bare spatial gate takes the paper's 7×7 (Woo et al. 2018).
	if n := len(s.Layers); !reflect.DeepEqual(s.Layers[n-2], engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(7)}) ||
		!reflect.DeepEqual(s.Layers[n-1], engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(3), NoBias: true, GateNorm: true}) {
		t.Errorf("spatial gates not read: %+v %+v", s.Layers[n-2], s.Layers[n-1])
	}
	out, _ := Save(s)
	s2, err := Load(out)
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if !reflect.DeepEqual(s, s2) {
		t.Errorf("round trip differs\n%s", out)
	}
	for _, line := range []string{"  - {act: hard-swish}\n", "  - {scale: 1e-06}\n  - {scale: 1.0}\n  - {shuffle: 2}\n",
		"  - {spatial-gate: 7}\n  - {spatial-gate: 3, bias: false, batch-norm: true}\n"} {
		if !strings.Contains(string(out), line) {
			t.Errorf("saved form lacks %q:\n%s", line, out)
		}
	}
}

// TestLoadErrors checks that each problem is reported with its position,
// the field, and what is allowed.
func TestLoadErrors(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 32, 32]\nlayers:\n"
	tests := []struct {
		name     string
		src      string
		sentinel error
		want     string // the whole first error
	}{
		{"unknown key with hint", head + "  - {conv: 8, kernal: 3}\n",
			ErrUnknown, `4:15: layer 1 (conv): unknown key "kernal"; did you mean "kernel"? (allowed: conv, kernel, stride, pad, dilation, groups, group-width, bias, relative-to, round, name, note)`},
		{"unknown kind with hint", head + "  - {convv: 8, kernel: 3}\n",
			ErrUnknown, `4:5: layer 1: unknown layer kind "convv"; did you mean "conv"? (kinds: conv, deconv, pool, global-pool, pool-to, upsample, norm, act, dropout, flatten, dense, reshape, block, concat, add, gate, scale, shuffle, fork, branch, to-space, to-channels, keep, spatial-gate)`},
		{"unknown top-level key", "stackfit: 1\ninput: [3, 32, 32]\nlayer:\n  - flatten\n",
			ErrUnknown, `3:1: file: unknown key "layer"; did you mean "layers"? (allowed: stackfit, name, note, input, training, stage, quiet, defaults, units, layers)`},
		{"wrong type", head + "  - {conv: eight, kernel: 3}\n",
			ErrType, `4:12: layer 1 (conv) → conv (filters): expected a whole number, found the text "eight"`},
		{"negative", head + "  - {conv: 8, kernel: -3}\n",
			ErrRange, `4:23: layer 1 (conv) → kernel: -3 is out of range; it must be between 1 and 65536`},
		{"zero", head + "  - {conv: 0, kernel: 3}\n",
			ErrRange, `4:12: layer 1 (conv) → conv (filters): 0 is out of range; it must be between 1 and 16777216`},
		{"past int64", head + "  - {conv: 99999999999999999999, kernel: 3}\n",
			ErrRange, `4:12: layer 1 (conv) → conv (filters): 99999999999999999999 is too large; it must be at most 16777216`},
		{"float for int", head + "  - {conv: 8.5, kernel: 3}\n",
			ErrType, `4:12: layer 1 (conv) → conv (filters): expected a whole number, found "8.5"`},
		{"missing kernel", head + "  - {conv: 8}\n",
			ErrMissing, `4:5: layer 1 (conv): needs a kernel; add e.g. kernel: 3 or kernel: [3, 5]`},
		{"bad choice", head + "  - {act: rleu}\n",
			ErrRange, `4:11: layer 1 (act) → act: "rleu" is not one of relu, leaky-relu, gelu, silu, sigmoid, tanh, relu6, hard-swish, hard-sigmoid, mish, softmax, prelu; did you mean "relu"?`},
		{"alias of a choice", head + "  - {act: lrelu}\n", // PyTorch's LeakyReLU, shortened; relu is one edit away but not meant
			ErrRange, `4:11: layer 1 (act) → act: "lrelu" is not one of relu, leaky-relu, gelu, silu, sigmoid, tanh, relu6, hard-swish, hard-sigmoid, mish, softmax, prelu; did you mean "leaky-relu"?`},
		{"bad pad word", head + "  - {conv: 8, kernel: 3, pad: half}\n",
			ErrRange, `4:31: layer 1 (conv) → pad: "half" is not one of same, valid`},
		{"input shape", "stackfit: 1\ninput: [3, 32]\nlayers: []\n",
			ErrType, `2:8: input: expected [channels, height, width], e.g. [3, 224, 224]; found a list`},
		{"missing input", "stackfit: 1\nlayers: []\n",
			ErrMissing, `1:1: input: missing; add the per-sample input as [channels, height, width], e.g. input: [3, 224, 224]`},
		{"version", "stackfit: 2\ninput: [3, 8, 8]\nlayers: []\n",
			ErrVersion, `1:11: stackfit: format version 2 is not supported; this stackfit reads version 1`},
		{"duplicate name", head + "  - {act: relu, name: a}\n  - {act: relu, name: a}\n",
			ErrName, `5:23: layer 2 (act) → name: "a" is already used on line 4; names must be unique`},
		{"bad name", head + "  - {act: relu, name: \"x; import os\"}\n",
			ErrName, `4:23: layer 1 (act) → name: "x; import os" is not a short identifier; use letters, digits, '_' and '-', starting with a letter, at most 32 characters`},
		{"two kinds", head + "  - {conv: 8, dense: 3}\n",
			ErrType, `4:15: layer 1: has two kinds, "conv" and "dense"; one layer per list item`},
		{"alias", "stackfit: 1\ninput: &i [3, 8, 8]\nlayers: []\nname: *i\n",
			ErrAlias, `2:8: file: anchors (&) and aliases (*) are not allowed in stack files; write the value out`},
		{"syntax", "stackfit: 1\ninput: [3, 8, 8\nlayers: []\n",
			ErrSyntax, `1:1: not valid YAML: did not find expected ',' or ']' (check indentation, colons, quotes and brackets from this line on)`},
		{"syntax on a later line", head + "  - {act: relu}\n  - conv: 8\n    kernel: 3\n  - conv 8: [\n",
			ErrSyntax, `7:1: not valid YAML: did not find expected node content (check indentation, colons, quotes and brackets from this line on)`},
		{"budget", "stackfit: 1\ninput: [3, 8, 8]\ntraining: {budget: lots}\nlayers: []\n",
			ErrRange, `3:20: training → budget: not a memory size: "lots"; write a number and a unit, e.g. 24GiB, 24GB or 24000MiB`},
		{"headroom", "stackfit: 1\ninput: [3, 8, 8]\ntraining: {headroom: 95%}\nlayers: []\n",
			ErrRange, `3:22: training → headroom: not a share: "95%" is outside 0%–90%`},
		{"shard", "stackfit: 1\ninput: [3, 8, 8]\ntraining: {shard: params}\nlayers: []\n",
			ErrRange, `3:19: training → shard: "params" is not one of none, optimizer, gradients, parameters`},
		{"binary", "stackfit: 1\x00\x01", ErrSyntax, `the file holds binary data (a NUL byte); a stack file is YAML text`},
		{"empty", "", ErrMissing, `the file is empty; a stack file needs at least input: and layers:`},
		{"slope on relu", head + "  - {act: relu, slope: 0.1}\n",
			ErrUnknown, `4:5: layer 1 (act): slope applies only to leaky-relu and prelu; remove it or write act: leaky-relu`},
		{"per-channel on mish", head + "  - {act: mish, per-channel: true}\n",
			ErrUnknown, `4:5: layer 1 (act): per-channel applies only to prelu; remove it or write act: prelu`},
		{"shuffle without groups", head + "  - {shuffle: 0}\n",
			ErrRange, `4:15: layer 1 (shuffle) → shuffle (groups): 0 is out of range; it must be between 1 and 16777216`},
		{"negative scale start", head + "  - {scale: -1}\n",
			ErrRange, `4:13: layer 1 (scale) → scale (initial factor): -1 is out of range; it must be at least 0 and below 1e+06`},
		{"dropout rate", head + "  - {dropout: 1.5}\n",
			ErrRange, `4:15: layer 1 (dropout) → dropout (rate): 1.5 is out of range; it must be at least 0 and below 1`},
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
			if got := list[0].Error(); !strings.HasPrefix(got, tt.want) {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}
}

// TestFreeTextRoundTrip: stack names and notes (free text a user types in
// the editor) save and reload unchanged, wherever they sit in the file.
// The cases are the corners of YAML block scalars (YAML 1.2, section 8.1:
// leading blank lines, indentation indicators, chomping) and characters
// YAML treats as line breaks or forbids in indentation; the first was found
// by FuzzLoad (a note opening with a blank line lost it on save).
func TestFreeTextRoundTrip(t *testing.T) {
	texts := []string{
		"\n0\n", "\n\nx", "\n", "\n x", " x\ny", "x\n ", "x \ny", "\tx\n", "x\n\t", "x\ty\nz",
		"x\n\n", "x\n\n\n", "x\r\ny", "a\u0085b", "\u2028x\ny", "x\u2029", "\x7f\nx", " ", " \n",
		"x\n  y\n", "#x\ny", "x\n#y", "- x\ny", "key: value\nmore", "|\n>", "'\"", "null", "~", "3", "yes",
		"plain", "Grades apples\non a belt\n",
	}
	for _, text := range texts {
		inner := engine.Layer{Kind: engine.KindAct, Note: text}
		s := &engine.Stack{Name: text, Note: text, Input: engine.Shape{C: 1, H: 8, W: 8}, Layers: []engine.Layer{
			{Kind: engine.KindAct, Note: text},
			{Kind: engine.KindBlock, Note: text, Body: []engine.Layer{{Kind: engine.KindBlock, Body: []engine.Layer{inner}}}},
		}}
		data, err := Save(s)
		if err != nil {
			t.Errorf("%q: save: %v", text, err)
			continue
		}
		back, err := Load(data)
		if err != nil {
			t.Errorf("%q: the saved file does not load: %v\n%s", text, err, data)
			continue
		}
		got := []string{back.Name, back.Note, back.Layers[0].Note, back.Layers[1].Note, back.Layers[1].Body[0].Body[0].Note}
		for i, g := range got {
			if g != text {
				t.Errorf("%q came back as %q (place %d) from\n%s", text, g, i, data)
			}
		}
	}
}
