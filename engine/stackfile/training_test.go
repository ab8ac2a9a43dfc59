package stackfile

import (
	"reflect"
	"strconv"
	"strings"
	"testing"

	"stackfit/engine"
)

// TestTrainingSection: every setting loads from its key, saves back in the
// order of engine.Settings, and reloads to the same stack, including
// settings written at their default value.
func TestTrainingSection(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\n"
	tests := []struct{ name, training, saved string }{
		{"every setting", "training: {headroom: 15%, overhead: 700MiB, workspace: 1GiB, checkpoint: 6, accumulate: 4, shard: optimizer, gpus: 8, budget: 24GiB, optimizer: AdamW, precision: bf16-mixed, batch: 256}\n",
			"training:\n  batch: 256\n  precision: bf16-mixed\n  optimizer: adamw\n  budget: 24GiB\n  gpus: 8\n  shard: optimizer\n  accumulate: 4\n  checkpoint: 6\n  workspace: 1GiB\n  overhead: 700MiB\n  headroom: 15%\n"},
		{"explicit defaults", "training: {batch: 1, gpus: 1, accumulate: 1, headroom: 10%, precision: fp32}\n",
			"training:\n  batch: 1\n  gpus: 1\n  accumulate: 1\n  headroom: 10%\n"},
		{"zeros", "training: {checkpoint: 0, budget: 0, workspace: 0GiB}\n", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Load([]byte(head + tt.training + "layers: []\n"))
			if err != nil {
				t.Fatal(err)
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
				t.Errorf("reload: %+v, %v; want %+v", back.Training, err, s.Training)
			}
		})
	}
}

// TestTrainingLimits: the loader refuses what engine.Settings refuses, at
// the same bounds, and names every key when one is unknown.
func TestTrainingLimits(t *testing.T) {
	for _, s := range engine.Settings() {
		if s.Kind != engine.SettingCount {
			continue
		}
		for _, v := range []int64{s.Min - 1, s.Max + 1} {
			src := "stackfit: 1\ninput: [3, 8, 8]\ntraining: {" + s.Key + ": " + strconv.FormatInt(v, 10) + "}\nlayers: []\n"
			_, err := Load([]byte(src))
			if err == nil || !strings.Contains(err.Error(), "training → "+s.Key+": "+strconv.FormatInt(v, 10)+" is out of range; it must be between "+strconv.FormatInt(s.Min, 10)+" and "+strconv.FormatInt(s.Max, 10)) {
				t.Errorf("%s %d: %v", s.Key, v, err)
			}
		}
	}
	_, err := Load([]byte("stackfit: 1\ninput: [3, 8, 8]\ntraining: {batchsize: 8}\nlayers: []\n"))
	if err == nil || !strings.Contains(err.Error(), "(allowed: "+strings.Join(engine.SettingKeys(), ", ")+")") {
		t.Errorf("unknown key: %v", err)
	}
}

// TestTrainingSizesNeedUnits: a size in the training section needs a unit
// (a bare 24 once read as 24 bytes); 0 needs none. The canonical save
// always writes a unit — B for a size that is no whole KiB — so every
// saved file loads again, and an old file with units loads unchanged.
func TestTrainingSizesNeedUnits(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\n"
	refused := []struct{ training, want string }{
		{"training: {budget: 24}\n", "3:20: training → budget: 24 has no unit; write 24GiB (or 24GB, 24000MiB)"},
		{"training: {workspace: 1.5}\n", "3:23: training → workspace: 1.5 has no unit; write 1.5GiB (or 1.5GB, 1500MiB)"},
		{"training:\n  overhead: 536870912\n", "4:13: training → overhead: 536870912 has no unit; write 536870912B for bytes (or a size such as 24GiB)"},
	}
	for _, tt := range refused {
		_, err := Load([]byte(head + tt.training + "layers: []\n"))
		if err == nil || err.Error() != tt.want {
			t.Errorf("%q: %v; want %s", tt.training, err, tt.want)
		}
	}
	// Saved and reloaded: each size is written with a unit.
	for _, tr := range []engine.Training{
		{Budget: 24 << 30, Workspace: 1000, Overhead: 700 << 20},
		{Budget: 24e9 + 1, Workspace: 1, Overhead: 1536},
	} {
		data, err := Save(&engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}, Training: tr})
		if err != nil {
			t.Fatal(err)
		}
		back, err := Load(data)
		if err != nil || back.Training != tr {
			t.Errorf("%+v saved as\n%s\nreads back as %+v, %v", tr, data, back.Training, err)
		}
		for _, line := range strings.Split(string(data), "\n") {
			for _, k := range []string{"budget: ", "workspace: ", "overhead: "} {
				if v, ok := strings.CutPrefix(strings.TrimSpace(line), k); ok && strings.Trim(v, "0123456789") == "" {
					t.Errorf("saved %q without a unit", line)
				}
			}
		}
	}
	// A file as saved before units were required: sizes with units, 0 bare.
	old := head + "training:\n  budget: 24GiB\n  workspace: 1000B\n  overhead: 0\nlayers: []\n"
	s, err := Load([]byte(old))
	if err != nil || s.Training != (engine.Training{Budget: 24 << 30, Workspace: 1000}) {
		t.Errorf("old file: %+v, %v", s, err)
	}
}
