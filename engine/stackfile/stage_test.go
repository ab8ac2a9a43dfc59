package stackfile

import (
	"errors"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
)

// TestStageSection: the stage settings load from their keys, save back in
// the order of engine.StageSettings with what is at its default left out,
// and reload to the same stack.
func TestStageSection(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\n"
	tests := []struct {
		name, stage, saved string
		want               engine.Stage
	}{
		{"every setting", "stage: {slope: 0.2, act: leaky-relu, groups: 16, norm: group, bias: true, kernel: 5, layers: 0, cap: 256}\n",
			"stage:\n  cap: 256\n  layers: 0\n  kernel: 5\n  bias: true\n  norm: group\n  groups: 16\n  act: leaky-relu\n  slope: 0.2\n",
			engine.Stage{Cap: 256, LayersSet: true, Kernel: 5, Bias: engine.On, Norm: engine.NormGroup, NormSet: true,
				Groups: 16, Act: engine.ActLeakyReLU, ActSet: true, Slope: 0.2}},
		{"none", "stage:\n  norm: none\n  act: NONE\n  bias: false\n",
			"stage:\n  bias: false\n  norm: none\n  act: none\n",
			engine.Stage{Bias: engine.Off, NormSet: true, NoNorm: true, ActSet: true, NoAct: true}},
		{"defaults written out are left out", "stage: {cap: 512, layers: 2}\n", "", engine.Stage{}},
		{"empty section", "stage: {}\n", "", engine.Stage{}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Load([]byte(head + tt.stage + "layers: []\n"))
			if err != nil {
				t.Fatal(err)
			}
			if s.Stage != tt.want {
				t.Errorf("loaded %+v, want %+v", s.Stage, tt.want)
			}
			data, err := Save(s)
			if err != nil {
				t.Fatal(err)
			}
			if want := head + tt.saved + "layers: []\n"; string(data) != want {
				t.Errorf("saved\n%s\nwant\n%s", data, want)
			}
			back, err := Load(data)
			if err != nil || !reflect.DeepEqual(back, s) {
				t.Errorf("reload: %+v, %v; want %+v", back.Stage, err, s.Stage)
			}
		})
	}
	// The section sits after training and before the layers.
	data, _ := Save(&engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}, Training: engine.Training{Batch: 8}, Stage: engine.Stage{Cap: 64}})
	if want := head + "training:\n  batch: 8\nstage:\n  cap: 64\nlayers: []\n"; string(data) != want {
		t.Errorf("saved\n%s\nwant\n%s", data, want)
	}
}

// TestStageErrors: a bad stage setting is reported with its position, the
// key and the fix; an unknown key gets a did-you-mean and the keys.
func TestStageErrors(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\n"
	tests := []struct {
		stage    string
		sentinel error
		want     string
	}{
		{"stage: {caps: 256}\n", ErrUnknown, `3:9: stage: unknown key "caps"; did you mean "cap"? (allowed: cap, layers, kernel, bias, norm, groups, act, slope, up)`},
		{"stage: {activation: relu}\n", ErrUnknown, `3:9: stage: unknown key "activation" (allowed: cap, layers, kernel, bias, norm, groups, act, slope, up)`},
		{"stage: {cap: 0}\n", ErrRange, `3:14: stage → cap: 0 is out of range; it must be between 1 and 16777216`},
		{"stage: {layers: 65}\n", ErrRange, `3:17: stage → layers: 65 is out of range; it must be between 0 and 64`},
		{"stage: {kernel: 4}\n", ErrRange, `3:17: stage → kernel: 4 is out of range; give an odd number from 1 to 15 (the padding k/2 then keeps the size)`},
		{"stage: {norm: bn}\n", ErrRange, `3:15: stage → norm: "bn" is not one of batch, group, instance, layer, none; did you mean "batch"?`},
		{"stage: {act: lrelu}\n", ErrRange, `3:14: stage → act: "lrelu" is not one of relu, leaky-relu, gelu, silu, sigmoid, tanh, relu6, hard-swish, hard-sigmoid, mish, softmax, prelu, none; did you mean "leaky-relu"?`},
		{"stage: {bias: maybe}\n", ErrType, `3:15: stage → bias: expected true or false, found the text "maybe"`},
		{"stage: {slope: 0}\n", ErrRange, `3:16: stage → slope: 0 is out of range; give a number above 0 and below 1e6, e.g. 0.2`},
		{"stage: 3\n", ErrType, `3:8: stage: expected stage settings (key: value lines), found "3"`},
	}
	for _, tt := range tests {
		_, err := Load([]byte(head + tt.stage + "layers: []\n"))
		var list ErrorList
		if !errors.Is(err, tt.sentinel) || !errors.As(err, &list) || list[0].Error() != tt.want {
			t.Errorf("%q:\ngot  %v\nwant %s", tt.stage, err, tt.want)
		}
	}
}

// TestStageCommentsKept: comments on the stage section and its keys
// survive an edit saved over the file, as the training section's do.
func TestStageCommentsKept(t *testing.T) {
	src := `stackfit: 1
input: [3, 64, 64]
# what the stage key inserts
stage:
  cap: 256      # the camera board's limit
  act: leaky-relu
  slope: 0.2    # as the discriminator uses
layers:
  - {conv: 16, kernel: 3, pad: 1}
`
	s, err := Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	s.Stage.Cap = 128
	s.Layers = append(s.Layers, engine.Layer{Kind: engine.KindAct})
	out, err := SaveOver([]byte(src), s)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"# what the stage key inserts\nstage:\n", "cap: 128 # the camera board's limit", "slope: 0.2 # as the discriminator uses"} {
		if !strings.Contains(string(out), want) {
			t.Errorf("lacks %q:\n%s", want, out)
		}
	}
	if back, err := Load(out); err != nil || back.Stage != s.Stage {
		t.Errorf("reads back as %+v, %v", back, err)
	}
}
