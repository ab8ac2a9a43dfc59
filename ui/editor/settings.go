package editor

import (
	"strconv"

	"stackfit/engine"
)

// settingSpec is one field of the training-setup form.
type settingSpec struct {
	key, help string
	get       func(t *engine.Training, so *engine.StageOptions) string
	set       func(t *engine.Training, so *engine.StageOptions, v string) error
}

// settingsSpecs lists the training settings, as engine.Settings describes
// them, and then the stage options, which only the editor has. The form
// leaves out workspace and overhead (set in the stack file or by flag).
func settingsSpecs() []settingSpec {
	var specs []settingSpec
	for _, s := range engine.Settings() {
		if s.Key == "workspace" || s.Key == "overhead" {
			continue
		}
		help := s.Help
		if s.Default == "" {
			help += " (empty: none)"
		}
		specs = append(specs, settingSpec{s.Key, help,
			func(t *engine.Training, _ *engine.StageOptions) string { return s.Format(*t) },
			func(t *engine.Training, _ *engine.StageOptions, v string) error { return s.Parse(t, v) }})
	}
	return append(specs,
		settingSpec{"stage cap", "most channels a new stage may reach",
			func(_ *engine.Training, so *engine.StageOptions) string { return strconv.FormatInt(so.Cap, 10) },
			func(_ *engine.Training, so *engine.StageOptions, v string) (err error) {
				so.Cap, err = engine.ParseInt("stage cap", v, 1, engine.MaxChannels)
				return
			}},
		settingSpec{"stage layers", "layers after a stage's downsampling one",
			func(_ *engine.Training, so *engine.StageOptions) string { return strconv.Itoa(so.Repeat) },
			func(_ *engine.Training, so *engine.StageOptions, v string) error {
				n, err := engine.ParseInt("stage layers", v, 0, 64)
				so.Repeat = int(n)
				return err
			}})
}
