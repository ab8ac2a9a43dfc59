package editor

import (
	"strconv"
	"strings"

	"stackfit/engine"
)

// settingSpec is one field of the training-setup form.
type settingSpec struct {
	key, help string
	get       func(t *engine.Training, so *engine.StageOptions) string
	set       func(t *engine.Training, so *engine.StageOptions, v string) error
}

func sizeText(b int64) string {
	if b == 0 {
		return ""
	}
	return engine.FormatBytesExact(b)
}

func parseSize(key, v string, empty int64) (int64, error) {
	if strings.TrimSpace(v) == "" {
		return empty, nil
	}
	b, err := engine.ParseBytes(v)
	if err != nil {
		return 0, &engine.FieldError{Field: key, Value: v, Want: "give a size such as 24GiB, 24GB or 24000MiB (empty: default)"}
	}
	return b, nil
}

func choice[T interface{ String() string }](key, v string, opts []T) (T, error) {
	ns := make([]string, len(opts))
	for i, o := range opts {
		ns[i] = o.String()
	}
	i, err := engine.ParseChoice(key, v, ns)
	if err != nil {
		var zero T
		return zero, err
	}
	return opts[i], nil
}

// settingsSpecs lists the training settings and the stage options.
func settingsSpecs() []settingSpec {
	intField := func(key, help string, lo, hi int64, get func(*engine.Training) *int64) settingSpec {
		return settingSpec{key, help,
			func(t *engine.Training, _ *engine.StageOptions) string {
				return strconv.FormatInt(max(*get(t), lo), 10)
			},
			func(t *engine.Training, _ *engine.StageOptions, v string) error {
				orig := *get(t)
				n, err := engine.ParseInt(key, v, lo, hi)
				if n == lo && orig == 0 {
					n = 0 // the default stays unwritten
				}
				*get(t) = n
				return err
			}}
	}
	return []settingSpec{
		intField("batch", "samples per optimizer step, all GPUs", 1, 1<<24, func(t *engine.Training) *int64 { return &t.Batch }),
		{"precision", "fp32, fp16-mixed, bf16-mixed or bf16",
			func(t *engine.Training, _ *engine.StageOptions) string { return t.Precision.String() },
			func(t *engine.Training, _ *engine.StageOptions, v string) (err error) {
				t.Precision, err = choice("precision", v, engine.Precisions())
				return
			}},
		{"optimizer", "sgd, momentum, adam, adamw, adagrad or rmsprop",
			func(t *engine.Training, _ *engine.StageOptions) string { return t.Optimizer.String() },
			func(t *engine.Training, _ *engine.StageOptions, v string) (err error) {
				t.Optimizer, err = choice("optimizer", v, engine.Optimizers())
				return
			}},
		{"budget", "GPU memory per device, e.g. 24GiB (empty: none)",
			func(t *engine.Training, _ *engine.StageOptions) string { return sizeText(t.Budget) },
			func(t *engine.Training, _ *engine.StageOptions, v string) (err error) {
				t.Budget, err = parseSize("budget", v, 0)
				return
			}},
		intField("gpus", "data-parallel GPUs", 1, 1<<16, func(t *engine.Training) *int64 { return &t.GPUs }),
		{"shard", "none, optimizer, gradients or parameters",
			func(t *engine.Training, _ *engine.StageOptions) string { return t.Shard.String() },
			func(t *engine.Training, _ *engine.StageOptions, v string) (err error) {
				t.Shard, err = choice("shard", v, engine.Shards())
				return
			}},
		intField("accumulate", "gradient-accumulation steps", 1, 1<<16, func(t *engine.Training) *int64 { return &t.Accumulate }),
		{"checkpoint", "keep every k-th output, recompute the rest (0 off)",
			func(t *engine.Training, _ *engine.StageOptions) string { return strconv.FormatInt(t.Checkpoint, 10) },
			func(t *engine.Training, _ *engine.StageOptions, v string) (err error) {
				t.Checkpoint, err = engine.ParseInt("checkpoint", v, 0, 1<<20)
				return
			}},
		{"headroom", "share of the budget kept free, e.g. 10%",
			func(t *engine.Training, _ *engine.StageOptions) string { return engine.FormatShare(t.HeadroomShare()) },
			func(t *engine.Training, _ *engine.StageOptions, v string) error {
				h, err := engine.ParseShare(v)
				if err != nil {
					return &engine.FieldError{Field: "headroom", Value: v, Want: "give a share from 0% to 90%, e.g. 10%"}
				}
				if h == engine.DefaultHeadroom && !t.HeadroomSet {
					return nil
				}
				t.Headroom, t.HeadroomSet = h, true
				return nil
			}},
		{"stage cap", "most channels a new stage may reach",
			func(_ *engine.Training, so *engine.StageOptions) string { return strconv.FormatInt(so.Cap, 10) },
			func(_ *engine.Training, so *engine.StageOptions, v string) (err error) {
				so.Cap, err = engine.ParseInt("stage cap", v, 1, engine.MaxChannels)
				return
			}},
		{"stage layers", "layers after a stage's downsampling one",
			func(_ *engine.Training, so *engine.StageOptions) string { return strconv.Itoa(so.Repeat) },
			func(_ *engine.Training, so *engine.StageOptions, v string) error {
				n, err := engine.ParseInt("stage layers", v, 0, 64)
				so.Repeat = int(n)
				return err
			}},
	}
}
