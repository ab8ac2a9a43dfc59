package editor

import (
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/ui/editor/form"
)

// settingSpec is one field of the setup form that edits the training
// setup or the stage settings.
type settingSpec struct {
	key, help string
	get       func(s *engine.Stack) string
	set       func(s *engine.Stack, v string) error
}

// settingsSpecs lists the training settings, as engine.Settings describes
// them, then the stage settings, as engine.StageSettings does (saved with
// the stack, keyed "stage KEY" in the form). The form leaves out
// workspace and overhead (set in the stack file or by flag).
func settingsSpecs() []settingSpec {
	var specs []settingSpec
	for _, s := range engine.Settings() {
		if s.Key == "workspace" || s.Key == "overhead" {
			continue
		}
		help := s.Help
		switch {
		case s.Key == "gpu":
			// The device names first, so a narrow form still shows some.
			help = "GPU model for the time estimate: " + strings.Join(s.Options, ", ")
		case s.Key == "dataset":
			help = "samples per epoch, for epoch time (0: none)"
		case s.Default == "":
			help += " (empty: none)"
		}
		specs = append(specs, settingSpec{s.Key, help,
			func(st *engine.Stack) string { return s.Format(st.Training) },
			func(st *engine.Stack, v string) error { return s.Parse(&st.Training, v) }})
	}
	for _, s := range engine.StageSettings() {
		help := s.Help
		if s.Default == "" {
			// Each template field's own help already says what empty
			// means ("empty: as the stack, else …"); only a field that
			// lacks it gets the general rule.
			if !strings.Contains(help, "(empty:") {
				help += " (empty: as the stack around the stage)"
			}
		} else {
			help += " (default " + s.Default + ")"
		}
		specs = append(specs, settingSpec{"stage " + s.Key, help,
			func(st *engine.Stack) string { return s.Format(st.Stage) },
			func(st *engine.Stack, v string) error { return s.Parse(&st.Stage, v) }})
	}
	return specs
}

// stackSpecs are the stack's own fields at the head of the setup form:
// its name, its note and the input shape.
func stackSpecs() []stackSpec {
	return []stackSpec{
		{"name", "the stack's name (shown in reports and the export)", engine.MaxStackNameLen, nil,
			func(s *engine.Stack) string { return s.Name },
			func(s *engine.Stack, v string) error {
				if len(v) > engine.MaxStackNameLen {
					return fmt.Errorf("name: at most %d bytes", engine.MaxStackNameLen)
				}
				s.Name = strings.TrimSpace(v)
				return nil
			}},
		{"note", "free text kept with the stack (" + lineBreak + " marks a line break)", engine.MaxNoteLen, noteBytes,
			func(s *engine.Stack) string {
				return strings.ReplaceAll(strings.TrimSuffix(s.Note, "\n"), "\n", lineBreak)
			},
			func(s *engine.Stack, v string) error {
				note := strings.ReplaceAll(v, lineBreak, "\n")
				if strings.HasSuffix(s.Note, "\n") && note != "" {
					note += "\n" // as the file had it
				}
				if len(note) > engine.MaxNoteLen {
					return fmt.Errorf("note: at most %d bytes", engine.MaxNoteLen)
				}
				s.Note = note
				return nil
			}},
		{"input", "one sample, channels×height×width, e.g. 3x256x256", 0, nil,
			func(s *engine.Stack) string { return s.Input.String() },
			func(s *engine.Stack, v string) error {
				in, err := engine.ParseShape("input", v)
				s.Input = in
				return err
			}},
	}
}

// lineBreak stands for a line break of a note in its one-line field.
const lineBreak = " ⏎ "

// noteBytes measures the note field's text as the note it stands for (each
// lineBreak one line feed), the length the stack file limits.
func noteBytes(v string) int { return len(strings.ReplaceAll(v, lineBreak, "\n")) }

// stackSpec is one of the stack's own fields in the setup form.
type stackSpec struct {
	key, help string
	limit     int              // the stack file's limit (form.Field's Limit)
	measure   func(string) int // how the limit counts (nil: bytes)
	get       func(s *engine.Stack) string
	set       func(s *engine.Stack, v string) error
}

// editSettings opens the setup form: the stack's name, note and input,
// the training setup, and the stage options.
func (m *Model) editSettings() {
	s0 := m.stack
	own, specs := stackSpecs(), settingsSpecs()
	var fields []form.Field
	for _, sp := range own {
		fields = append(fields, form.Field{Key: sp.key, Help: sp.help, Value: sp.get(s0), Limit: sp.limit, Measure: sp.measure})
	}
	for _, sp := range specs {
		fields = append(fields, form.Field{Key: sp.key, Help: sp.help, Value: sp.get(s0)})
	}
	build := func(values []string) (*engine.Stack, []string) {
		s := s0.Clone()
		errs := make([]string, len(values))
		for i, sp := range own {
			if values[i] == fields[i].Value {
				continue // untouched: the stack keeps it as it is
			}
			if err := sp.set(s, values[i]); err != nil {
				errs[i] = err.Error()
			}
		}
		for i, sp := range specs {
			if values[len(own)+i] == fields[len(own)+i].Value {
				continue
			}
			if err := sp.set(s, values[len(own)+i]); err != nil {
				errs[len(own)+i] = err.Error()
			}
		}
		return s, errs
	}
	check := func(values []string) ([]string, []bool) {
		s, errs := build(values)
		m.preview, m.previewBlocked = m.analyzeQuick(s), anyText(errs)
		return errs, nil
	}
	commit := func(values []string) tea.Cmd {
		s, _ := build(values)
		if s.Name == s0.Name && s.Note == s0.Note && s.Input == s0.Input && s.Training == s0.Training && s.Stage == s0.Stage {
			m.setStatus("setup unchanged", statusInfo)
			return nil
		}
		return m.change("changed the setup", func(st *engine.Stack) (addr, error) {
			st.Name, st.Note, st.Input, st.Training, st.Stage = s.Name, s.Note, s.Input, s.Training, s.Stage
			return nil, nil
		})
	}
	m.openForm("stack setup: name, input, training and stages", fields, check, formJob{commit: commit, cancelled: "setup unchanged"})
}
