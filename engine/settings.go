package engine

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Bounds of the training settings. The stack file, the command-line flags
// and the editor's setup form all take them from Settings.
const (
	MaxBatch      = 1 << 24 // samples per optimizer step
	MaxGPUs       = 1 << 16 // data-parallel GPUs
	MaxAccumulate = 1 << 16 // gradient-accumulation steps per optimizer step
	MaxCheckpoint = 1 << 20 // checkpoint interval, in rows
)

// SettingKind is the kind of value a training setting takes.
type SettingKind uint8

// Setting kinds.
const (
	SettingCount  SettingKind = iota // a whole number from Min to Max
	SettingChoice                    // one of Options
	SettingSize                      // a memory size such as 24GiB
	SettingShare                     // a share such as 10% or 0.1
	SettingFlag                      // yes or no (a stage setting)
	SettingReal                      // a real number between bounds (a stage setting)
	SettingText                      // text with its own syntax (the efficiencies)
)

// Setting describes one training setting: its key, what it means, the
// values it takes, its default, and how it reads from and writes to text.
// An unset setting (the zero value in Training) means its default.
type Setting struct {
	Key     string      // stack-file key and flag name, e.g. "batch"
	Help    string      // what it sets, one short line
	Kind    SettingKind // the kind of value
	Min     int64       // least value of a count
	Max     int64       // greatest value of a count
	Options []string    // the values of a choice, the default first
	Default string      // the value used when unset, as text ("" for none)
	Example string      // a typical value, e.g. "256"

	num       func(*Training) *int64            // a count's or size's field
	getOption func(Training) int                // a choice's option index
	setOption func(*Training, int)              // stores a choice's option index
	share     func(*Training) (*float64, *bool) // a share's field and its set flag
	text      func(*Training) *Efficiency       // a text setting's field (the efficiencies)
}

// Settings returns the training settings in their canonical order (the
// order the stack file is saved in). Each call builds a fresh list.
func Settings() []Setting {
	count := func(key, help string, lo, hi int64, example string, f func(*Training) *int64) Setting {
		return Setting{Key: key, Help: help, Kind: SettingCount, Min: lo, Max: hi,
			Default: strconv.FormatInt(lo, 10), Example: example, num: f}
	}
	size := func(key, help string, def int64, example string, f func(*Training) *int64) Setting {
		s := Setting{Key: key, Help: help, Kind: SettingSize, Example: example, num: f}
		if def != 0 {
			s.Default = FormatBytesExact(def)
			s.Help += " (default " + s.Default + ")"
		}
		return s
	}
	choice := func(key string, options []string, example string, get func(Training) int, set func(*Training, int)) Setting {
		return Setting{Key: key, Help: orList(options), Kind: SettingChoice, Options: options,
			Default: options[0], Example: example, getOption: get, setOption: set}
	}
	return []Setting{
		count("batch", "samples per optimizer step over all GPUs", 1, MaxBatch, "256",
			func(t *Training) *int64 { return &t.Batch }),
		choice("precision", optionNames(Precisions()), "bf16-mixed",
			func(t Training) int { return int(t.Precision) }, func(t *Training, i int) { t.Precision = Precision(i) }),
		choice("optimizer", optionNames(Optimizers()), "adamw",
			func(t Training) int { return int(t.Optimizer) }, func(t *Training, i int) { t.Optimizer = Optimizer(i) }),
		size("budget", "GPU memory per device", 0, "24GiB",
			func(t *Training) *int64 { return &t.Budget }),
		count("gpus", "data-parallel GPUs", 1, MaxGPUs, "8",
			func(t *Training) *int64 { return &t.GPUs }),
		choice("shard", optionNames(Shards()), "optimizer",
			func(t Training) int { return int(t.Shard) }, func(t *Training, i int) { t.Shard = Shard(i) }),
		count("accumulate", "gradient-accumulation steps per optimizer step", 1, MaxAccumulate, "4",
			func(t *Training) *int64 { return &t.Accumulate }),
		count("checkpoint", "keep every k-th output, recompute the rest (0: off)", 0, MaxCheckpoint, "6",
			func(t *Training) *int64 { return &t.Checkpoint }),
		size("workspace", "convolution workspace", DefaultWorkspace, "1GiB",
			func(t *Training) *int64 { return &t.Workspace }),
		size("overhead", "CUDA context and libraries", DefaultOverhead, "700MiB",
			func(t *Training) *int64 { return &t.Overhead }),
		{Key: "headroom", Help: "share of the budget kept free (default " + FormatShare(DefaultHeadroom) + ")",
			Kind: SettingShare, Default: FormatShare(DefaultHeadroom), Example: "15%",
			share: func(t *Training) (*float64, *bool) { return &t.Headroom, &t.HeadroomSet }},
		gpuSetting(),
		count("dataset", "training samples per epoch, for the epoch-time estimate (0: none)", 0, MaxDataset, "1281167",
			func(t *Training) *int64 { return &t.Dataset }),
		{Key: "efficiency", Help: "measured share of the device's peak per class of operation: conv, pointwise, grouped, matrix, memory, norm (stackfit calibrate writes it; a class left out: its related class's figure, else the assumed default)",
			Kind: SettingText, Example: "conv 42%, pointwise 30%, grouped 9.5%, matrix 55%, memory 61%",
			text: func(t *Training) *Efficiency { return &t.Efficiency }},
	}
}

// SettingKeys returns the keys of Settings, in order.
func SettingKeys() []string {
	ss := Settings()
	keys := make([]string, len(ss))
	for i, s := range ss {
		keys[i] = s.Key
	}
	return keys
}

// SettingFor returns the setting with the given key.
func SettingFor(key string) (Setting, bool) {
	for _, s := range Settings() {
		if s.Key == key {
			return s, true
		}
	}
	return Setting{}, false
}

// IsDefault reports whether the setting is unset in t, so that the
// canonical save leaves it out.
func (s Setting) IsDefault(t Training) bool {
	switch {
	case s.num != nil:
		return *s.num(&t) == 0
	case s.getOption != nil:
		return s.getOption(t) == 0
	case s.share != nil:
		_, set := s.share(&t)
		return !*set
	case s.text != nil:
		return *s.text(&t) == Efficiency{}
	}
	return true
}

// Format returns the setting's value in t as text that Parse reads back;
// an unset setting reads as its Default.
func (s Setting) Format(t Training) string {
	switch {
	case s.num != nil:
		v := *s.num(&t)
		switch {
		case v == 0:
			return s.Default
		case s.Kind == SettingSize:
			return FormatBytesExact(v)
		}
		return strconv.FormatInt(v, 10)
	case s.getOption != nil:
		if i := s.getOption(t); i >= 0 && i < len(s.Options) {
			return s.Options[i]
		}
		return "invalid"
	case s.share != nil:
		v, set := s.share(&t)
		if !*set {
			return s.Default
		}
		return FormatShare(*v)
	case s.text != nil:
		return FormatEfficiency(*s.text(&t))
	}
	return ""
}

// Parse sets the setting in t from text, as typed in a form or given on
// the command line. Counts are whole numbers, choices any case, sizes such
// as 24GiB (empty text unsets a size), shares such as 10% or 0.1. A value
// that reads the same as the current one leaves t as it is, so an unset
// setting stays unset. A refusal is a *FieldError naming the key.
func (s Setting) Parse(t *Training, text string) error {
	u := *t
	var err error
	switch s.Kind {
	case SettingCount:
		var n int64
		if n, err = ParseInt(s.Key, text, s.Min, s.Max); err == nil {
			err = s.SetNumber(&u, n)
		}
	case SettingChoice:
		var i int
		if i, err = ParseChoice(s.Key, text, s.Options); err == nil {
			err = s.SetOption(&u, i)
		}
	case SettingSize:
		var b int64
		if strings.TrimSpace(text) != "" {
			if b, err = ParseBytes(text); err != nil {
				if errors.Is(err, ErrNoUnit) {
					return &FieldError{s.Key, text, err.Error()}
				}
				return &FieldError{s.Key, text, "give a size such as 24GiB, 24GB or 24000MiB (empty: default)"}
			}
		}
		err = s.SetNumber(&u, b)
	case SettingShare:
		var v float64
		if v, err = ParseShare(text); err != nil {
			return &FieldError{s.Key, text, "give a share from 0% to 90%, e.g. 10%"}
		}
		err = s.SetShare(&u, v)
	case SettingText:
		var e Efficiency
		if s.text == nil {
			return &FieldError{s.Key, text, "this setting takes no value"}
		}
		if e, err = ParseEfficiency(text); err != nil {
			return &FieldError{s.Key, text, err.Error()}
		}
		*s.text(&u) = e
	default:
		err = &FieldError{s.Key, text, "this setting takes no value"}
	}
	if err != nil {
		return err
	}
	if s.Format(u) != s.Format(*t) {
		*t = u
	}
	return nil
}

// SetNumber stores n in a count (from Min to Max) or a size (0 or more;
// 0 unsets it).
func (s Setting) SetNumber(t *Training, n int64) error {
	v := strconv.FormatInt(n, 10)
	switch {
	case s.num == nil:
		return &FieldError{s.Key, v, "give " + s.wants()}
	case s.Kind == SettingCount && (n < s.Min || n > s.Max):
		return &FieldError{s.Key, v, fmt.Sprintf("give a whole number from %d to %d", s.Min, s.Max)}
	case n < 0:
		return &FieldError{s.Key, v, "give a size of 0 or more, e.g. 24GiB"}
	}
	*s.num(t) = n
	return nil
}

// SetOption stores Options[i] in a choice.
func (s Setting) SetOption(t *Training, i int) error {
	if s.setOption == nil || i < 0 || i >= len(s.Options) {
		return &FieldError{s.Key, strconv.Itoa(i), "give " + s.wants()}
	}
	s.setOption(t, i)
	return nil
}

// SetShare stores v, from 0 to 0.9, in a share.
func (s Setting) SetShare(t *Training, v float64) error {
	if s.share == nil || math.IsNaN(v) || v < 0 || v > 0.9 {
		return &FieldError{s.Key, strconv.FormatFloat(v, 'g', -1, 64), "give " + s.wants()}
	}
	p, set := s.share(t)
	*p, *set = v, true
	return nil
}

// wants says what the setting accepts.
func (s Setting) wants() string {
	switch s.Kind {
	case SettingCount:
		return fmt.Sprintf("a whole number from %d to %d", s.Min, s.Max)
	case SettingChoice:
		return "one of " + strings.Join(s.Options, ", ")
	case SettingSize:
		return "a size such as 24GiB"
	case SettingShare:
		return "a share from 0% to 90%, e.g. 10%"
	case SettingText:
		return "shares per class, e.g. " + s.Example
	}
	return "no value"
}

// optionNames returns the stack-file names of a choice's values.
func optionNames[T fmt.Stringer](xs []T) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = x.String()
	}
	return out
}

// orList writes "a, b or c".
func orList(xs []string) string {
	if len(xs) < 2 {
		return strings.Join(xs, "")
	}
	return strings.Join(xs[:len(xs)-1], ", ") + " or " + xs[len(xs)-1]
}

// gpuSetting is the device choice: "none" or a device's --gpu name
// (Devices). It sets the device of the time estimate and, when no budget
// is set, the budget (Training.WithDevice).
func gpuSetting() Setting {
	options := append(append([]string{"none"}, DeviceKeys()...), CPUDevice.Key)
	return Setting{Key: "gpu", Help: "GPU model: the device for the time estimate and, without a budget, the budget (e.g. a100-80gb, h100-sxm, l4, rtx-4090; cpu: the processor, calibrate it)",
		Kind: SettingChoice, Options: options, Default: options[0], Example: "h100-sxm",
		getOption: func(t Training) int { return t.GPU }, setOption: func(t *Training, i int) { t.GPU = i }}
}
