package editor

import (
	"strings"
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
	if formOf(m) == nil {
		t.Fatal("t did not open the setup form")
	}
	want := []string{"name", "note", "input"}
	for _, s := range engine.Settings() {
		if s.Key != "workspace" && s.Key != "overhead" {
			want = append(want, s.Key)
		}
	}
	for _, k := range engine.StageSettingKeys() {
		want = append(want, "stage "+k)
	}
	keys, vals := formOf(m).Keys(), formOf(m).Values()
	if len(keys) != len(want) {
		t.Fatalf("%d fields, want %v", len(keys), want)
	}
	for i, k := range want {
		if keys[i] != k {
			t.Errorf("field %d is %q, want %q", i, keys[i], k)
		}
		if s, ok := engine.SettingFor(k); ok && vals[i] != s.Format(t0) {
			t.Errorf("%s shows %q, want %q", k, vals[i], s.Format(t0))
		}
	}
	press(m, "enter")
	if m.stack.Training != t0 || m.file.dirty {
		t.Errorf("accepting the form untouched changed the training to %+v (dirty %v)", m.stack.Training, m.file.dirty)
	}
	if t0.GPUs != 0 {
		t.Fatalf("the example sets gpus; this test wants it unset")
	}
	press(m, "t")
	for formOf(m).Keys()[formOf(m).Focused()] != "gpus" {
		press(m, "tab")
	}
	press(m, "ctrl+u")
	typeText(m, "1")
	press(m, "enter")
	if m.stack.Training.GPUs != 0 || m.file.dirty {
		t.Errorf("gpus 1, the default, was written: %+v (dirty %v)", m.stack.Training, m.file.dirty)
	}
}

// TestSetupHintsSayEmptyOnce: each setup-form hint says what an empty
// field means at most once (a template field's own help already names
// its default; the form must not add a second, general one), and every
// stage field that falls back to the stack says so. Source: the form's
// own contract that a hint is one short line.
func TestSetupHintsSayEmptyOnce(t *testing.T) {
	for _, s := range settingsSpecs() {
		if n := strings.Count(s.help, "empty:"); n > 1 {
			t.Errorf("%s: hint says what empty means %d times: %q", s.key, n, s.help)
		}
		if strings.HasPrefix(s.key, "stage ") && !strings.Contains(s.help, "empty:") && !strings.Contains(s.help, "(default ") {
			t.Errorf("%s: hint names no default: %q", s.key, s.help)
		}
	}
}
