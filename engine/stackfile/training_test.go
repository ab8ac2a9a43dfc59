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
