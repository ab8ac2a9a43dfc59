package engine

import (
	"errors"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// TestStageSettingsCoverStage: every field of Stage is set by exactly one
// stage setting, so a new field cannot be left without a key, bounds and
// a saved form.
func TestStageSettingsCoverStage(t *testing.T) {
	owner := map[string]string{}
	for _, s := range StageSettings() {
		texts := []string{s.Example}
		if s.Kind == SettingChoice && slices.Contains(s.Options, "none") {
			texts = append(texts, "none")
		}
		changed := 0
		for _, text := range texts {
			var st Stage
			if err := s.Parse(&st, text); err != nil {
				t.Fatalf("%s %q: %v", s.Key, text, err)
			}
			if s.IsDefault(st) {
				t.Errorf("%s: %q reads as the default", s.Key, text)
			}
			v := reflect.ValueOf(st)
			for i := 0; i < v.NumField(); i++ {
				if v.Field(i).IsZero() {
					continue
				}
				name := v.Type().Field(i).Name
				if o, ok := owner[name]; ok && o != s.Key {
					t.Errorf("field %s is set by both %s and %s", name, o, s.Key)
				}
				owner[name] = s.Key
				changed++
			}
		}
		if changed == 0 {
			t.Errorf("%s sets no field", s.Key)
		}
	}
	if n := reflect.TypeFor[Stage]().NumField(); len(owner) != n {
		t.Errorf("stage settings set %d of Stage's %d fields: %v", len(owner), n, owner)
	}
	if strings.Join(StageSettingKeys(), " ") != "cap layers kernel bias norm groups act slope up" {
		t.Errorf("keys %v", StageSettingKeys())
	}
}

// TestStageSettingsParse: accepted text, the Stage it gives, and how it
// formats; a default typed again leaves the setting unset.
func TestStageSettingsParse(t *testing.T) {
	tests := []struct {
		key, text string
		want      Stage
		format    string
	}{
		{"cap", "256", Stage{Cap: 256}, "256"},
		{"cap", "512", Stage{}, "512"}, // the default: stays unset
		{"cap", "", Stage{}, "512"},
		{"layers", "0", Stage{LayersSet: true}, "0"}, // 0 is a count, not the default
		{"layers", " 3 ", Stage{Layers: 3, LayersSet: true}, "3"},
		{"layers", "2", Stage{}, "2"},
		{"kernel", "5", Stage{Kernel: 5}, "5"},
		{"kernel", "", Stage{}, ""}, // as the stack
		{"bias", "yes", Stage{Bias: On}, "yes"},
		{"bias", "false", Stage{Bias: Off}, "no"},
		{"norm", "Group", Stage{Norm: NormGroup, NormSet: true}, "group"},
		{"norm", "batch", Stage{Norm: NormBatch, NormSet: true}, "batch"}, // set: it overrides the stack's
		{"norm", "none", Stage{NormSet: true, NoNorm: true}, "none"},
		{"groups", "16", Stage{Groups: 16}, "16"},
		{"act", "leaky-relu", Stage{Act: ActLeakyReLU, ActSet: true}, "leaky-relu"},
		{"act", "relu", Stage{Act: ActReLU, ActSet: true}, "relu"},
		{"act", "none", Stage{ActSet: true, NoAct: true}, "none"},
		{"slope", "0.2", Stage{Slope: 0.2}, "0.2"},
		{"up", "Upsample", Stage{Up: UpResize}, "upsample"},
		{"up", "deconv", Stage{}, "deconv"},
	}
	for _, tt := range tests {
		s, ok := StageSettingFor(tt.key)
		if !ok {
			t.Fatalf("no setting %q", tt.key)
		}
		var got Stage
		if err := s.Parse(&got, tt.text); err != nil || got != tt.want || s.Format(got) != tt.format {
			t.Errorf("%s %q: %+v (%q), %v; want %+v (%q)", tt.key, tt.text, got, s.Format(got), err, tt.want, tt.format)
		}
		back := Stage{}
		if err := s.Parse(&back, s.Format(got)); err != nil || back != got {
			t.Errorf("%s %q: reads back as %+v, %v", tt.key, s.Format(got), back, err)
		}
	}
	// Empty text unsets a value that was set.
	s, _ := StageSettingFor("norm")
	st := Stage{NormSet: true, NoNorm: true}
	if err := s.Parse(&st, " "); err != nil || st != (Stage{}) {
		t.Errorf("empty norm: %+v, %v", st, err)
	}
}

// TestStageSettingsRefuse: refusals are *FieldError values naming the key
// and the fix, and leave the stage unchanged.
func TestStageSettingsRefuse(t *testing.T) {
	tests := []struct{ key, text, want string }{
		{"cap", "0", `cap: "0" is not valid; give a whole number from 1 to 16777216`},
		{"layers", "65", `layers: "65" is not valid; give a whole number from 0 to 64`},
		{"layers", "-1", `layers: "-1" is not valid; give a whole number from 0 to 64`},
		{"kernel", "4", `kernel: "4" is not valid; give an odd number from 1 to 15 (the padding k/2 then keeps the size)`},
		{"kernel", "17", `kernel: "17" is not valid; give an odd number from 1 to 15`},
		{"bias", "maybe", `bias: "maybe" is not valid; give yes or no`},
		{"norm", "bn", `norm: "bn" is not valid; give one of batch, group, instance, layer, none; did you mean "batch"?`},
		{"groups", "x", `groups: "x" is not valid; give a whole number from 1 to 16777216`},
		{"act", "lrelu", `act: "lrelu" is not valid; give one of relu, leaky-relu, gelu, silu, sigmoid, tanh, relu6, hard-swish, hard-sigmoid, mish, softmax, prelu, none; did you mean "leaky-relu"?`},
		{"slope", "0", `slope: "0" is not valid; give a number above 0 and below 1e6, e.g. 0.2`},
		{"slope", "NaN", `slope: "NaN" is not valid; give a number above 0 and below 1e6, e.g. 0.2`},
		{"up", "transposed", `up: "transposed" is not valid; give one of deconv, upsample`},
	}
	for _, tt := range tests {
		s, _ := StageSettingFor(tt.key)
		orig := Stage{Cap: 64, Kernel: 3, Groups: 8}
		st := orig
		err := s.Parse(&st, tt.text)
		var fe *FieldError
		if !errors.As(err, &fe) || fe.Field != tt.key || !strings.HasPrefix(err.Error(), tt.want) {
			t.Errorf("%s %q: %v; want %s", tt.key, tt.text, err, tt.want)
		}
		if st != orig {
			t.Errorf("%s %q changed the stage to %+v", tt.key, tt.text, st)
		}
	}
	var zero StageSetting
	if err := zero.Parse(&Stage{}, "1"); err == nil || zero.Format(Stage{}) != "" || !zero.IsDefault(Stage{}) {
		t.Error("the zero StageSetting accepts a value")
	}
}

// TestStageSettingsOddText: odd text is either refused with a *FieldError
// naming the key or accepted with a value that reads back unchanged.
func TestStageSettingsOddText(t *testing.T) {
	texts := []string{"", " ", "-", "-0", "1e99", "NaN", "inf", "99999999999999999999", "0x10", "1_000",
		"½", "\xff", "9223372036854775807", "none", "NONE", "yes", "0", "1", "3", "0.5", "relu", "group"}
	for _, s := range StageSettings() {
		for _, text := range texts {
			var st Stage
			if err := s.Parse(&st, text); err != nil {
				var fe *FieldError
				if !errors.As(err, &fe) || fe.Field != s.Key || st != (Stage{}) {
					t.Errorf("%s %q: %v (stage %+v)", s.Key, text, err, st)
				}
				continue
			}
			back := Stage{}
			if err := s.Parse(&back, s.Format(st)); err != nil || back != st {
				t.Errorf("%s %q: accepted as %q, which reads back as %+v, %v", s.Key, text, s.Format(st), back, err)
			}
		}
	}
}
