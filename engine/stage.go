package engine

import (
	"fmt"
	"strconv"
	"strings"
)

// Defaults and bounds of the stage settings.
const (
	DefaultStageCap    = 512 // most channels a new stage reaches
	DefaultStageLayers = 2   // layers at the new size after the downsampling one
	DefaultStageKernel = 3   // the kernel when the stack has no convolution to copy
	DefaultStageGroups = 32  // group norm's groups when the stack gives none (Wu and He 2018 use 32)
	MaxStageLayers     = 64
	MaxStageKernel     = 15
	maxStageSlope      = 1e6 // leaky-relu's slope stays below this, as a layer's does
)

// Stage holds the settings of the downsampling stage InsertStage adds (the
// editor's stage key), saved with the stack in its stage section. Zero
// values mean defaults: DefaultStageCap and DefaultStageLayers, and for
// every template field "as the stack around the insertion point"
// (StageTemplate). Only what was set explicitly is saved.
type Stage struct {
	Cap       int64 // most channels a stage may reach; 0: DefaultStageCap
	Layers    int64 // layers at the new size after the downsampling one
	LayersSet bool  // Layers was given (0 is a count of its own); false: DefaultStageLayers

	Kernel  int64    // the convolutions' kernel (odd); 0: from the stack
	Bias    Toggle   // the convolutions' bias; Unset: from the stack
	Norm    NormKind // the norm after each convolution, when NormSet and not NoNorm
	NormSet bool     // Norm or NoNorm was chosen; false: from the stack
	NoNorm  bool     // no norm
	Groups  int64    // group norm's groups; 0: from the stack
	Act     ActKind  // the activation after each norm, when ActSet and not NoAct
	ActSet  bool     // Act or NoAct was chosen; false: from the stack
	NoAct   bool     // no activation
	Slope   float64  // leaky-relu's slope; 0: from the stack
	Up      UpMode   // how the up-stage key doubles the size (UpDeconv by default)
}

// StageTemplate returns the options of a stage inserted after top-level
// item after (−1: at the start): the cap and layer count of s.Stage, and
// the layers each repeat holds — a convolution, a norm and an activation —
// as s.Stage sets them explicitly, else copied from the stack, else the
// fallback (a 3×3 convolution without bias, batch norm, ReLU).
//
// The copy comes from the nearest plain convolution at or before the
// insertion point (in stack order, inside blocks, gates and forks too;
// plain: one group, a square kernel from 2 to MaxStageKernel, so a
// depthwise or 1×1 convolution is passed over): its kernel when odd (an
// even one cannot keep the size; the default 3 stays) and bias, the
// norm right after it (or none), and the activation after that (or none;
// at the end of a residual block's layers, the block's after: activation).
// A stack using leaky-relu 0.2 so gets leaky-relu 0.2.
func StageTemplate(s *Stack, after int) StageOptions {
	st := s.Stage
	opt := StageOptions{Cap: DefaultStageCap, Repeat: DefaultStageLayers, Up: st.Up}
	if st.Cap > 0 {
		opt.Cap = st.Cap
	}
	if st.LayersSet {
		opt.Repeat = int(min(max(st.Layers, 0), MaxStageLayers))
	}
	if after >= len(s.Layers) {
		after = len(s.Layers) - 1
	}
	if c := nearestConv(s.Layers[:max(after+1, 0)], nil); c.conv != nil {
		if k := c.conv.Kernel.H; k%2 == 1 {
			opt.Kernel = k // an even kernel (a 4×4 downsampling one) cannot keep the size: the default stays
		}
		opt.Bias = Off
		if !c.conv.NoBias {
			opt.Bias = On
		}
		opt.NoNorm = c.norm == nil
		if c.norm != nil {
			opt.Norm, opt.Groups = c.norm.Norm, c.norm.NormGroups
		}
		opt.NoAct = !c.hasAct
		opt.Act, opt.Slope, opt.PerChannel = c.act, c.slope, c.perChannel
	}
	if st.Kernel > 0 {
		opt.Kernel = st.Kernel
	}
	if st.Bias != Unset {
		opt.Bias = st.Bias
	}
	if st.NormSet {
		if st.Norm != opt.Norm || opt.NoNorm {
			opt.Groups = 0 // groups copied with another norm do not carry over
		}
		opt.Norm, opt.NoNorm = st.Norm, st.NoNorm
	}
	if st.Groups > 0 {
		opt.Groups = st.Groups
	}
	if st.ActSet {
		if st.Act != opt.Act || opt.NoAct {
			opt.Slope = 0
		}
		opt.Act, opt.NoAct = st.Act, st.NoAct
	}
	if st.Slope > 0 {
		opt.Slope = st.Slope
	}
	if opt.NoAct || opt.Act != ActLeakyReLU {
		opt.Slope = 0
	}
	if opt.NoAct || opt.Act != ActPReLU {
		opt.PerChannel = false
	}
	if opt.NoNorm || opt.Norm != NormGroup {
		opt.Groups = 0
	}
	return opt
}

// copied is what StageTemplate copies from the stack: a convolution, the
// norm after it and the activation after that.
type copied struct {
	conv       *Layer
	norm       *Layer // nil: no norm follows
	hasAct     bool
	act        ActKind
	slope      float64
	perChannel bool // a prelu's one slope per channel
}

// nearestConv finds the last plain convolution in ls (bodies included) and
// what follows it in its own list; post is the activation after the list
// ends (a residual block's after:), or nil.
func nearestConv(ls []Layer, post *Layer) copied {
	for i := len(ls) - 1; i >= 0; i-- {
		l := &ls[i]
		if SpecOf(l.Kind).Body {
			var inner *Layer
			if l.Kind == KindBlock && l.Residual && l.HasPostAct {
				inner = &Layer{Kind: KindAct, Act: l.PostAct}
			}
			if c := nearestConv(l.Body, inner); c.conv != nil {
				return c
			}
			continue
		}
		if !plainConv(l) {
			continue
		}
		c := copied{conv: l}
		next := func(j int) *Layer {
			if j < len(ls) {
				return &ls[j]
			}
			if j == len(ls) {
				return post
			}
			return nil
		}
		j := i + 1
		if n := next(j); n != nil && n.Kind == KindNorm {
			c.norm = n
			j++
		}
		if n := next(j); n != nil && n.Kind == KindAct {
			c.hasAct, c.act, c.slope, c.perChannel = true, n.Act, n.Slope, n.PerChannel
		}
		return c
	}
	return copied{}
}

// plainConv reports whether l is a convolution a stage can copy: one
// group and a square kernel from 2 to MaxStageKernel (a 1×1 projection or
// a depthwise convolution says nothing of the stack's layers).
func plainConv(l *Layer) bool {
	k := l.Kernel
	return l.Kind == KindConv && !l.Depthwise && l.Groups <= 1 && k.H == k.W &&
		k.H >= 2 && k.H <= MaxStageKernel
}

// StageSetting describes one stage setting as Setting does a training
// setting: its key (in the stack file's stage section and the editor's
// setup form), what it means, the values it takes, its default, and how it
// reads from and writes to text. An unset setting (the zero value in
// Stage) means its default; for the template fields that is "as the
// stack" (Default is "").
type StageSetting struct {
	Key        string      // stack-file key, e.g. "cap"
	Help       string      // what it sets, one short line
	Kind       SettingKind // SettingCount, SettingChoice, SettingFlag or SettingReal
	Min, Max   int64       // bounds of a count
	FMin, FMax float64     // a real number lies above FMin and below FMax
	Options    []string    // the values of a choice
	Default    string      // the value used when unset, as text ("" for as the stack)
	Example    string      // a typical value, e.g. "256"

	get   func(Stage) (string, bool) // the value as text, and whether it is set
	parse func(*Stage, string) error // sets the value from trimmed, non-empty text
	clear func(*Stage)               // unsets it
}

// StageSettings returns the stage settings in their canonical order (the
// order the stack file is saved in). Each call builds a fresh list.
func StageSettings() []StageSetting {
	count := func(key, help string, lo, hi int64, def, example string, odd bool, f func(*Stage) *int64) StageSetting {
		want := fmt.Sprintf("give a whole number from %d to %d", lo, hi)
		if odd {
			want = fmt.Sprintf("give an odd number from %d to %d (the padding k/2 then keeps the size)", lo, hi)
		}
		return StageSetting{Key: key, Help: help, Kind: SettingCount, Min: lo, Max: hi, Default: def, Example: example,
			get: func(st Stage) (string, bool) {
				v := *f(&st)
				return strconv.FormatInt(v, 10), v != 0
			},
			parse: func(st *Stage, text string) error {
				v, err := strconv.ParseInt(text, 10, 64)
				if err != nil || v < lo || v > hi || odd && v%2 == 0 {
					return &FieldError{key, text, want}
				}
				*f(st) = v
				return nil
			},
			clear: func(st *Stage) { *f(st) = 0 }}
	}
	normOptions := append(append([]string{}, normNames[:]...), "none")
	actOptions := append(append([]string{}, actList...), "none")
	return []StageSetting{
		count("cap", "most channels a new stage may reach", 1, MaxChannels, strconv.Itoa(DefaultStageCap), "256", false,
			func(st *Stage) *int64 { return &st.Cap }),
		{Key: "layers", Help: "layers at the new size after the downsampling one", Kind: SettingCount,
			Min: 0, Max: MaxStageLayers, Default: strconv.Itoa(DefaultStageLayers), Example: "1",
			get: func(st Stage) (string, bool) { return strconv.FormatInt(st.Layers, 10), st.LayersSet },
			parse: func(st *Stage, text string) error {
				v, err := strconv.ParseInt(text, 10, 64)
				if err != nil || v < 0 || v > MaxStageLayers {
					return &FieldError{"layers", text, fmt.Sprintf("give a whole number from 0 to %d", MaxStageLayers)}
				}
				st.Layers, st.LayersSet = v, true
				return nil
			},
			clear: func(st *Stage) { st.Layers, st.LayersSet = 0, false }},
		count("kernel", "the convolutions' kernel, odd (empty: as the stack, else 3)", 1, MaxStageKernel, "", "3", true,
			func(st *Stage) *int64 { return &st.Kernel }),
		{Key: "bias", Help: "the convolutions' bias, yes or no (empty: as the stack, else only without a norm)",
			Kind: SettingFlag, Options: []string{"yes", "no"}, Example: "no",
			get: func(st Stage) (string, bool) { return yesNo(st.Bias == On), st.Bias != Unset },
			parse: func(st *Stage, text string) error {
				b, err := ParseBool("bias", text)
				if err != nil {
					return err
				}
				st.Bias = Off
				if b {
					st.Bias = On
				}
				return nil
			},
			clear: func(st *Stage) { st.Bias = Unset }},
		{Key: "norm", Help: "the norm after each convolution: " + orList(normOptions) + " (empty: as the stack, else batch)",
			Kind: SettingChoice, Options: normOptions, Example: "group",
			get: func(st Stage) (string, bool) {
				if st.NoNorm {
					return "none", st.NormSet
				}
				return st.Norm.String(), st.NormSet
			},
			parse: func(st *Stage, text string) error {
				i, err := ParseChoice("norm", text, normOptions)
				if err != nil {
					return err
				}
				st.NormSet, st.NoNorm, st.Norm = true, i == len(normNames), NormKind(min(i, len(normNames)-1))
				if st.NoNorm {
					st.Norm = 0
				}
				return nil
			},
			clear: func(st *Stage) { st.Norm, st.NormSet, st.NoNorm = 0, false, false }},
		count("groups", fmt.Sprintf("group norm's groups (empty: as the stack, else %d)", DefaultStageGroups), 1, MaxChannels, "", "16", false,
			func(st *Stage) *int64 { return &st.Groups }),
		{Key: "act", Help: "the activation after each norm: " + orList(actOptions) + " (empty: as the stack, else relu)",
			Kind: SettingChoice, Options: actOptions, Example: "leaky-relu",
			get: func(st Stage) (string, bool) {
				if st.NoAct {
					return "none", st.ActSet
				}
				return st.Act.String(), st.ActSet
			},
			parse: func(st *Stage, text string) error {
				i, err := ParseChoice("act", text, actOptions)
				if err != nil {
					return err
				}
				st.ActSet, st.NoAct, st.Act = true, i == len(actList), ActKind(min(i, len(actList)-1))
				if st.NoAct {
					st.Act = 0
				}
				return nil
			},
			clear: func(st *Stage) { st.Act, st.ActSet, st.NoAct = 0, false, false }},
		{Key: "slope", Help: "leaky-relu's negative slope (empty: as the stack, else 0.01)", Kind: SettingReal,
			FMin: 0, FMax: maxStageSlope, Example: "0.2",
			get: func(st Stage) (string, bool) { return strconv.FormatFloat(st.Slope, 'g', -1, 64), st.Slope != 0 },
			parse: func(st *Stage, text string) error {
				v, err := strconv.ParseFloat(text, 64)
				if err != nil || !(v > 0 && v < maxStageSlope) {
					return &FieldError{"slope", text, "give a number above 0 and below 1e6, e.g. 0.2"}
				}
				st.Slope = v
				return nil
			},
			clear: func(st *Stage) { st.Slope = 0 }},
		{Key: "up", Help: "how an up-stage doubles the size: deconv (2×2, stride 2) or upsample (nearest ×2, then a convolution)",
			Kind: SettingChoice, Options: append([]string{}, upNames[:]...), Default: UpDeconv.String(), Example: "upsample",
			get: func(st Stage) (string, bool) { return st.Up.String(), st.Up != UpDeconv },
			parse: func(st *Stage, text string) error {
				i, err := ParseChoice("up", text, upNames[:])
				if err != nil {
					return err
				}
				st.Up = UpMode(i)
				return nil
			},
			clear: func(st *Stage) { st.Up = UpDeconv }},
	}
}

// StageSettingKeys returns the keys of StageSettings, in order.
func StageSettingKeys() []string {
	ss := StageSettings()
	keys := make([]string, len(ss))
	for i, s := range ss {
		keys[i] = s.Key
	}
	return keys
}

// StageSettingFor returns the stage setting with the given key.
func StageSettingFor(key string) (StageSetting, bool) {
	for _, s := range StageSettings() {
		if s.Key == key {
			return s, true
		}
	}
	return StageSetting{}, false
}

// IsDefault reports whether the setting is unset in st, so that the
// canonical save leaves it out.
func (s StageSetting) IsDefault(st Stage) bool {
	if s.get == nil {
		return true
	}
	_, set := s.get(st)
	return !set
}

// Format returns the setting's value in st as text that Parse reads back;
// an unset setting reads as its Default ("" for as the stack).
func (s StageSetting) Format(st Stage) string {
	if s.get == nil {
		return ""
	}
	if v, set := s.get(st); set {
		return v
	}
	return s.Default
}

// Parse sets the setting in st from text, as typed in a form or read from
// a stack file: counts are whole numbers, choices any case, flags yes or
// no; empty text unsets it. A value that reads the same as the current one
// leaves st as it is, so an unset setting stays unset. A refusal is a
// *FieldError naming the key, and leaves st unchanged.
func (s StageSetting) Parse(st *Stage, text string) error {
	if s.parse == nil {
		return &FieldError{s.Key, text, "this setting takes no value"}
	}
	t := strings.TrimSpace(text)
	u := *st
	if t == "" {
		s.clear(&u)
	} else if err := s.parse(&u, t); err != nil {
		return err
	}
	if s.Format(u) != s.Format(*st) {
		*st = u
	}
	return nil
}
