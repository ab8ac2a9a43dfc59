package editor

import (
	"testing"

	"stackfit/engine"
)

// TestSetupFormFromSettings: the setup form shows the training settings
// of engine.Settings (but workspace and overhead) with their help, then the
// stage options; accepting it untouched changes nothing, and a setting
// given its default text stays unset.
func TestSetupFormFromSettings(t *testing.T) {
	m := newModel(t, example(t), 120, 40)
	t0 := m.stack.Training
	press(m, "t")
	if m.form == nil {
		t.Fatal("t did not open the setup form")
	}
	var want []string
	for _, s := range engine.Settings() {
		if s.Key != "workspace" && s.Key != "overhead" {
			want = append(want, s.Key)
		}
	}
	want = append(want, "stage cap", "stage layers")
	if len(m.form.fields) != len(want) {
		t.Fatalf("%d fields, want %v", len(m.form.fields), want)
	}
	for i, k := range want {
		f := m.form.fields[i]
		if f.key != k {
			t.Errorf("field %d is %q, want %q", i, f.key, k)
		}
		if s, ok := engine.SettingFor(k); ok && f.input.Value() != s.Format(t0) {
			t.Errorf("%s shows %q, want %q", k, f.input.Value(), s.Format(t0))
		}
	}
	press(m, "enter")
	if m.stack.Training != t0 || m.dirty {
		t.Errorf("accepting the form untouched changed the training to %+v (dirty %v)", m.stack.Training, m.dirty)
	}
	if t0.GPUs != 0 {
		t.Fatalf("the example sets gpus; this test wants it unset")
	}
	press(m, "t")
	for m.form.fields[m.form.focus].key != "gpus" {
		press(m, "tab")
	}
	press(m, "ctrl+u")
	typeText(m, "1")
	press(m, "enter")
	if m.stack.Training.GPUs != 0 || m.dirty {
		t.Errorf("gpus 1, the default, was written: %+v (dirty %v)", m.stack.Training, m.dirty)
	}
}
