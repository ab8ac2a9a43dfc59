package engine

import (
	"errors"
	"reflect"
	"strings"
	"testing"
)

// TestSettingsCoverTraining: every field of Training is set by exactly one
// setting (HeadroomSet with Headroom), so a new field cannot be left
// without a key, bounds and a saved form.
func TestSettingsCoverTraining(t *testing.T) {
	owner := map[string]string{}
	for _, s := range Settings() {
		var tr Training
		if err := s.Parse(&tr, s.Example); err != nil {
			t.Fatalf("%s: example %q: %v", s.Key, s.Example, err)
		}
		if s.IsDefault(tr) {
			t.Errorf("%s: example %q reads as the default", s.Key, s.Example)
		}
		v := reflect.ValueOf(tr)
		changed := 0
		for i := 0; i < v.NumField(); i++ {
			if !v.Field(i).IsZero() {
				name := v.Type().Field(i).Name
				if o, ok := owner[name]; ok {
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
	if n := reflect.TypeFor[Training]().NumField(); len(owner) != n {
		t.Errorf("settings set %d of Training's %d fields: %v", len(owner), n, owner)
	}
}

// TestSettingsRoundTrip: the default and the example of every setting read
// back through Format; the default leaves a zero Training unset.
func TestSettingsRoundTrip(t *testing.T) {
	keys := map[string]bool{}
	for _, s := range Settings() {
		if keys[s.Key] {
			t.Errorf("key %s twice", s.Key)
		}
		keys[s.Key] = true
		if got, ok := SettingFor(s.Key); !ok || got.Key != s.Key {
			t.Errorf("SettingFor(%q) = %q, %v", s.Key, got.Key, ok)
		}
		var zero Training
		if got := s.Format(zero); got != s.Default {
			t.Errorf("%s: unset formats as %q, want the default %q", s.Key, got, s.Default)
		}
		tr := zero
		if err := s.Parse(&tr, s.Default); err != nil || tr != zero {
			t.Errorf("%s: parsing the default %q gave %+v, %v; want it left unset", s.Key, s.Default, tr, err)
		}
		tr = zero
		if err := s.Parse(&tr, s.Example); err != nil {
			t.Fatalf("%s: %v", s.Key, err)
		}
		back := zero
		if err := s.Parse(&back, s.Format(tr)); err != nil || back != tr {
			t.Errorf("%s: %q reads back as %+v, %v; want %+v", s.Key, s.Format(tr), back, err, tr)
		}
		if s.Kind == SettingChoice && (len(s.Options) == 0 || s.Default != s.Options[0]) {
			t.Errorf("%s: default %q is not the first option of %v", s.Key, s.Default, s.Options)
		}
	}
	if strings.Join(SettingKeys(), " ") != "batch precision optimizer budget gpus shard accumulate checkpoint workspace overhead headroom gpu dataset efficiency" {
		t.Errorf("keys %v", SettingKeys())
	}
	if _, ok := SettingFor("lr"); ok {
		t.Error("SettingFor found a key that is not a setting")
	}
}

// TestSettingsParse: accepted text and the values it sets.
func TestSettingsParse(t *testing.T) {
	tests := []struct {
		key, text string
		want      Training
	}{
		{"batch", " 256 ", Training{Batch: 256}},
		{"batch", "16777216", Training{Batch: 1 << 24}}, // MaxBatch, stackfit's own limit
		{"precision", "BF16-Mixed", Training{Precision: BF16Mixed}},
		{"optimizer", "adamw", Training{Optimizer: AdamW}},
		{"shard", "gradients", Training{Shard: ShardGradients}},
		{"budget", "24GiB", Training{Budget: 24 << 30}}, // GiB = 2^30 bytes (IEC 80000-13)
		{"budget", "24GB", Training{Budget: 24e9}},      // GB = 10^9 bytes (SI)
		{"budget", "", Training{}},                      // empty: no budget
		{"gpus", "8", Training{GPUs: 8}},
		{"accumulate", "4", Training{Accumulate: 4}},
		{"checkpoint", "6", Training{Checkpoint: 6}},
		{"workspace", "1GiB", Training{Workspace: 1 << 30}},   // IEC 80000-13
		{"overhead", "700MiB", Training{Overhead: 700 << 20}}, // MiB = 2^20 bytes (IEC 80000-13)
		{"headroom", "15%", Training{Headroom: 0.15, HeadroomSet: true}},
		{"headroom", "0", Training{Headroom: 0, HeadroomSet: true}}, // an explicit zero differs from the default
		{"headroom", "0.1", Training{}},                             // reads as the default 10%: stays unset
		{"gpus", "1", Training{}},                                   // the default: stays unset
		{"budget", "0", Training{}},                                 // 0 needs no unit: no budget
		{"overhead", "96B", Training{Overhead: 96}},                 // B: bytes, written out
	}
	for _, tt := range tests {
		s, _ := SettingFor(tt.key)
		var got Training
		if err := s.Parse(&got, tt.text); err != nil || got != tt.want {
			t.Errorf("%s %q: %+v, %v; want %+v", tt.key, tt.text, got, err, tt.want)
		}
	}
	// A value set explicitly stays set when given again.
	s, _ := SettingFor("gpus")
	tr := Training{GPUs: 1}
	if err := s.Parse(&tr, "1"); err != nil || tr.GPUs != 1 {
		t.Errorf("gpus 1 over an explicit 1: %+v, %v", tr, err)
	}
}

// TestSettingsRefuse: refusals are *FieldError values naming the key and
// the fix, and leave the training unchanged.
func TestSettingsRefuse(t *testing.T) {
	tests := []struct{ key, text, want string }{
		{"batch", "0", `batch: "0" is not valid; give a whole number from 1 to 16777216`},
		{"gpus", "65537", `gpus: "65537" is not valid; give a whole number from 1 to 65536`},
		{"checkpoint", "-1", `checkpoint: "-1" is not valid; give a whole number from 0 to 1048576`},
		{"precision", "fp8", `precision: "fp8" is not valid; give one of fp32, fp16-mixed, bf16-mixed, bf16, fp16-master, bf16-master`},
		{"budget", "lots", `budget: "lots" is not valid; give a size such as 24GiB, 24GB or 24000MiB (empty: default)`},
		{"headroom", "95%", `headroom: "95%" is not valid; give a share from 0% to 90%, e.g. 10%`},
		{"headroom", "", `headroom: "" is not valid; give a share from 0% to 90%, e.g. 10%`},
		// A size without a unit is refused, naming the fix (it used to mean bytes).
		{"budget", "24", `budget: "24" is not valid; 24 has no unit; write 24GiB (or 24GB, 24000MiB)`},
		{"budget", " 1.5 ", `budget: " 1.5 " is not valid; 1.5 has no unit; write 1.5GiB (or 1.5GB, 1500MiB)`},
		{"workspace", "512", `workspace: "512" is not valid; 512 has no unit; write 512GiB (or 512GB, 512000MiB)`},
		{"overhead", "734003200", `overhead: "734003200" is not valid; 734003200 has no unit; write 734003200B for bytes (or a size such as 24GiB)`},
	}
	for _, tt := range tests {
		s, _ := SettingFor(tt.key)
		orig := Training{Batch: 64, GPUs: 2, Budget: 1 << 30, HeadroomSet: true, Headroom: 0.2}
		tr := orig
		err := s.Parse(&tr, tt.text)
		var fe *FieldError
		if !errors.As(err, &fe) || fe.Field != tt.key || err.Error() != tt.want {
			t.Errorf("%s %q: %v; want %s", tt.key, tt.text, err, tt.want)
		}
		if tr != orig {
			t.Errorf("%s %q changed the training to %+v", tt.key, tt.text, tr)
		}
	}
	// The typed setters refuse values of the wrong kind or out of range.
	for _, s := range Settings() {
		var tr Training
		for _, err := range []error{s.SetNumber(&tr, -1), s.SetOption(&tr, -1), s.SetOption(&tr, 99), s.SetShare(&tr, 2)} {
			var fe *FieldError
			if !errors.As(err, &fe) || fe.Field != s.Key {
				t.Errorf("%s: %v is not a *FieldError naming the key", s.Key, err)
			}
		}
		if tr != (Training{}) {
			t.Errorf("%s: refused values changed the training to %+v", s.Key, tr)
		}
	}
	var zero Setting
	if err := zero.Parse(&Training{}, "1"); err == nil || zero.Format(Training{}) != "" || !zero.IsDefault(Training{}) {
		t.Error("the zero Setting accepts a value")
	}
}

// TestSettingsOddText: odd text is either refused with a *FieldError
// naming the key or accepted with a value that reads back unchanged.
func TestSettingsOddText(t *testing.T) {
	texts := []string{"", " ", "-", "-0", "1e99", "NaN", "inf", "-inf", "99999999999999999999", "0x10", "1_000",
		"½", "\xff", "9223372036854775807", "-9223372036854775808", "8EiB", "90%", "90.0000001%", "FP32", "none"}
	for _, s := range Settings() {
		for _, text := range texts {
			var tr Training
			err := s.Parse(&tr, text)
			if err != nil {
				var fe *FieldError
				if !errors.As(err, &fe) || fe.Field != s.Key || tr != (Training{}) {
					t.Errorf("%s %q: %v (training %+v)", s.Key, text, err, tr)
				}
				continue
			}
			back := Training{}
			if err := s.Parse(&back, s.Format(tr)); err != nil || back != tr {
				t.Errorf("%s %q: accepted as %q, which reads back as %+v, %v", s.Key, text, s.Format(tr), back, err)
			}
		}
	}
}
