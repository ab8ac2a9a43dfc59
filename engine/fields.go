package engine

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// ErrField is wrapped by every *FieldError.
var ErrField = errors.New("bad field value")

// FieldError reports a value a field cannot take, naming the field and
// what it accepts.
type FieldError struct {
	Field string // the field's key, e.g. "kernel"
	Value string // the text given
	Want  string // what the field accepts
}

// Error formats the problem.
func (e *FieldError) Error() string {
	return fmt.Sprintf("%s: %q is not valid; %s", e.Field, e.Value, e.Want)
}

// Unwrap returns ErrField.
func (e *FieldError) Unwrap() error { return ErrField }

// Field is one editable property of a layer, read and written as text (the
// editor's forms and the quick-entry line use these).
type Field struct {
	Key  string // short name, e.g. "kernel"
	Help string // what it accepts, e.g. "n or h×w, e.g. 3 or 3x5"
	Get  func(*Layer) string
	Set  func(*Layer, string) error
}

// Limits on field values (the stack file enforces the same).
const (
	MaxChannels = 1 << 24
	MaxWindow   = 1 << 16
	MaxSpatial  = 1 << 20
	MaxFactor   = 1 << 10
	MaxRepeat   = 1024
	MaxNameLen  = 32
)

// ValidName reports whether s can name a layer: letters, digits, '_' and
// '-', starting with a letter or '_', at most MaxNameLen characters.
func ValidName(s string) bool {
	if s == "" || len(s) > MaxNameLen {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		letter := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '_'
		if !letter && (i == 0 || !(c >= '0' && c <= '9' || c == '-')) {
			return false
		}
	}
	return true
}

// ParseInt reads a whole number in [lo, hi] for field key.
func ParseInt(key, s string, lo, hi int64) (int64, error) {
	v, err := strconv.ParseInt(strings.TrimSpace(s), 10, 64)
	if err != nil || v < lo || v > hi {
		return 0, &FieldError{key, s, fmt.Sprintf("give a whole number from %d to %d", lo, hi)}
	}
	return v, nil
}

// ParsePair reads "n" or "h×w" ("3", "3x5", "3×5") with both in [lo, hi].
func ParsePair(key, s string, lo, hi int64) (Pair, error) {
	t := strings.TrimSpace(strings.ReplaceAll(strings.ToLower(s), "×", "x"))
	want := fmt.Sprintf("give n or h×w with values from %d to %d, e.g. 3 or 3x5", lo, hi)
	parts := strings.Split(t, "x")
	if len(parts) > 2 {
		return Pair{}, &FieldError{key, s, want}
	}
	h, err := strconv.ParseInt(parts[0], 10, 64)
	if err != nil || h < lo || h > hi {
		return Pair{}, &FieldError{key, s, want}
	}
	if len(parts) == 1 {
		return Square(h), nil
	}
	w, err := strconv.ParseInt(parts[1], 10, 64)
	if err != nil || w < lo || w > hi {
		return Pair{}, &FieldError{key, s, want}
	}
	return Pair{h, w}, nil
}

// ParseShape reads "C×H×W" ("1024x4x4").
func ParseShape(key, s string) (Shape, error) {
	t := strings.ReplaceAll(strings.ToLower(strings.TrimSpace(s)), "×", "x")
	parts := strings.Split(t, "x")
	want := "give channels×height×width, e.g. 1024x4x4"
	if len(parts) != 3 {
		return Shape{}, &FieldError{key, s, want}
	}
	var v [3]int64
	lims := [3]int64{MaxChannels, MaxSpatial, MaxSpatial}
	for i, p := range parts {
		n, err := strconv.ParseInt(p, 10, 64)
		if err != nil || n < 1 || n > lims[i] {
			return Shape{}, &FieldError{key, s, want}
		}
		v[i] = n
	}
	return Shape{v[0], v[1], v[2]}, nil
}

// ParseBool reads yes/no, true/false, on/off.
func ParseBool(key, s string) (bool, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "yes", "y", "true", "on", "1":
		return true, nil
	case "no", "n", "false", "off", "0":
		return false, nil
	}
	return false, &FieldError{key, s, "give yes or no"}
}

// ParseChoice reads one of options (case-insensitive) and returns its index.
func ParseChoice(key, s string, options []string) (int, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	for i, o := range options {
		if t == o {
			return i, nil
		}
	}
	return 0, &FieldError{key, s, "give one of " + strings.Join(options, ", ")}
}

// ParseRate reads a number in [0, 1).
func ParseRate(key, s string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || math.IsNaN(v) || v < 0 || v >= 1 {
		return 0, &FieldError{key, s, "give a number at least 0 and below 1, e.g. 0.25"}
	}
	return v, nil
}

// ParsePadding reads "n", "h×w", "same" or "valid".
func ParsePadding(key, s string) (Padding, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "same":
		return Padding{Mode: PadSame}, nil
	case "valid":
		return Padding{Mode: PadValid}, nil
	}
	p, err := ParsePair(key, s, 0, MaxWindow)
	if err != nil {
		return Padding{}, &FieldError{key, s, "give n, h×w, same or valid"}
	}
	return Padding{Size: p}, nil
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func padText(p Padding) string {
	switch p.Mode {
	case PadSame:
		return "same"
	case PadValid:
		return "valid"
	}
	return pairText(p.Size)
}

func names[T fmt.Stringer](xs []T) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = x.String()
	}
	return out
}

// FieldsFor returns the editable fields of a kind, in form order; every
// kind ends with name and note.
func FieldsFor(k Kind) []Field {
	var fs []Field
	filters := Field{"filters", "output channels, 1 to 16777216",
		func(l *Layer) string { return strconv.FormatInt(l.Filters, 10) },
		func(l *Layer, s string) (err error) { l.Filters, err = ParseInt("filters", s, 1, MaxChannels); return }}
	kernel := Field{"kernel", "n or h×w, e.g. 3 or 3x5",
		func(l *Layer) string { return pairText(l.Kernel) },
		func(l *Layer, s string) (err error) { l.Kernel, err = ParsePair("kernel", s, 1, MaxWindow); return }}
	stride := Field{"stride", "n or h×w",
		func(l *Layer) string { return pairText(l.stride()) },
		func(l *Layer, s string) (err error) { l.Stride, err = ParsePair("stride", s, 1, MaxWindow); return }}
	pad := Field{"pad", "n, h×w, same or valid",
		func(l *Layer) string { return padText(l.Pad) },
		func(l *Layer, s string) (err error) { l.Pad, err = ParsePadding("pad", s); return }}
	dilation := Field{"dilation", "n or h×w",
		func(l *Layer) string { return pairText(l.dilation()) },
		func(l *Layer, s string) (err error) { l.Dilation, err = ParsePair("dilation", s, 1, MaxWindow); return }}
	groups := Field{"groups", "n or depthwise",
		func(l *Layer) string {
			if l.Depthwise {
				return "depthwise"
			}
			return strconv.FormatInt(max(l.Groups, 1), 10)
		},
		func(l *Layer, s string) error {
			if strings.EqualFold(strings.TrimSpace(s), "depthwise") || strings.EqualFold(strings.TrimSpace(s), "dw") {
				l.Depthwise, l.Groups = true, 0
				return nil
			}
			g, err := ParseInt("groups", s, 1, MaxChannels)
			if err != nil {
				return &FieldError{"groups", s, "give a whole number or depthwise"}
			}
			l.Depthwise, l.Groups = false, g
			return nil
		}}
	bias := Field{"bias", "yes or no",
		func(l *Layer) string { return yesNo(!l.NoBias) },
		func(l *Layer, s string) error { b, err := ParseBool("bias", s); l.NoBias = !b; return err }}
	mode := Field{"mode", "max or avg",
		func(l *Layer) string { return l.Pool.String() },
		func(l *Layer, s string) error {
			i, err := ParseChoice("mode", s, []string{"max", "avg"})
			l.Pool = PoolMode(i)
			return err
		}}
	switch k {
	case KindConv, KindDeconv:
		fs = []Field{filters, kernel, stride, pad, dilation, groups, bias}
		if k == KindDeconv {
			fs = append(fs, Field{"out-pad", "n or h×w, below the stride",
				func(l *Layer) string { return pairText(l.OutPad) },
				func(l *Layer, s string) (err error) { l.OutPad, err = ParsePair("out-pad", s, 0, MaxWindow); return }})
		}
	case KindPool:
		fs = []Field{mode, kernel, stride, {"pad", "n or h×w",
			func(l *Layer) string { return pairText(l.Pad.Size) },
			func(l *Layer, s string) (err error) {
				l.Pad.Mode = PadExplicit
				l.Pad.Size, err = ParsePair("pad", s, 0, MaxWindow)
				return
			}}, {"ceil", "yes or no",
			func(l *Layer) string { return yesNo(l.Ceil) },
			func(l *Layer, s string) (err error) { l.Ceil, err = ParseBool("ceil", s); return }}}
	case KindGlobalPool:
		fs = []Field{mode}
	case KindPoolTo:
		fs = []Field{{"size", "n or h×w",
			func(l *Layer) string { return pairText(l.Size) },
			func(l *Layer, s string) (err error) { l.Size, err = ParsePair("size", s, 1, MaxSpatial); return }}}
	case KindUpsample:
		fs = []Field{{"factor", "n or h×w",
			func(l *Layer) string { return pairText(l.Factor) },
			func(l *Layer, s string) (err error) { l.Factor, err = ParsePair("factor", s, 1, MaxFactor); return }},
			{"mode", "nearest or bilinear",
				func(l *Layer) string { return l.Upsample.String() },
				func(l *Layer, s string) error {
					i, err := ParseChoice("mode", s, []string{"nearest", "bilinear"})
					l.Upsample = UpsampleMode(i)
					return err
				}}}
	case KindNorm:
		fs = []Field{{"type", "batch, group, instance or layer",
			func(l *Layer) string { return l.Norm.String() },
			func(l *Layer, s string) error {
				i, err := ParseChoice("type", s, names(NormKinds()))
				l.Norm = NormKind(i)
				return err
			}},
			{"groups", "channel groups (group norm)",
				func(l *Layer) string { return strconv.FormatInt(l.NormGroups, 10) },
				func(l *Layer, s string) (err error) {
					if strings.TrimSpace(s) == "0" {
						l.NormGroups = 0
						return nil
					}
					l.NormGroups, err = ParseInt("groups", s, 1, MaxChannels)
					return
				}},
			{"affine", "yes, no or default",
				func(l *Layer) string {
					switch l.Affine {
					case On:
						return "yes"
					case Off:
						return "no"
					}
					return "default"
				},
				func(l *Layer, s string) error {
					if strings.EqualFold(strings.TrimSpace(s), "default") {
						l.Affine = Unset
						return nil
					}
					b, err := ParseBool("affine", s)
					if err != nil {
						return &FieldError{"affine", s, "give yes, no or default"}
					}
					l.Affine = Off
					if b {
						l.Affine = On
					}
					return nil
				}}}
	case KindAct:
		fs = []Field{{"function", strings.Join(names(ActKinds()), ", "),
			func(l *Layer) string { return l.Act.String() },
			func(l *Layer, s string) error {
				i, err := ParseChoice("function", s, names(ActKinds()))
				l.Act = ActKind(i)
				return err
			}},
			{"slope", "negative slope of leaky-relu, e.g. 0.01",
				func(l *Layer) string { return strconv.FormatFloat(l.Slope, 'g', -1, 64) },
				func(l *Layer, s string) (err error) {
					v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
					if err != nil || math.IsNaN(v) || v < 0 || v >= 1e6 {
						return &FieldError{"slope", s, "give a number from 0, e.g. 0.2"}
					}
					l.Slope = v
					return nil
				}}}
	case KindDropout:
		fs = []Field{{"rate", "share of values zeroed, 0 to below 1",
			func(l *Layer) string { return strconv.FormatFloat(l.Rate, 'g', -1, 64) },
			func(l *Layer, s string) (err error) { l.Rate, err = ParseRate("rate", s); return }}}
	case KindDense:
		fs = []Field{{"units", "output values, 1 to 16777216",
			func(l *Layer) string { return strconv.FormatInt(l.Filters, 10) },
			func(l *Layer, s string) (err error) { l.Filters, err = ParseInt("units", s, 1, MaxChannels); return }}, bias}
	case KindReshape:
		fs = []Field{{"target", "channels×height×width, e.g. 1024x4x4",
			func(l *Layer) string {
				return fmt.Sprintf("%dx%dx%d", l.Target.C, l.Target.H, l.Target.W)
			},
			func(l *Layer, s string) (err error) { l.Target, err = ParseShape("target", s); return }}}
	case KindBlock:
		fs = []Field{{"repeat", "times the body runs, 1 to 1024",
			func(l *Layer) string { return strconv.FormatInt(max(l.Repeat, 1), 10) },
			func(l *Layer, s string) (err error) { l.Repeat, err = ParseInt("repeat", s, 1, MaxRepeat); return }},
			{"residual", "yes or no",
				func(l *Layer) string { return yesNo(l.Residual) },
				func(l *Layer, s string) (err error) { l.Residual, err = ParseBool("residual", s); return }},
			{"shortcut-norm", "yes or no (batch norm after a projection shortcut)",
				func(l *Layer) string { return yesNo(!l.NoShortcutNorm) },
				func(l *Layer, s string) error {
					b, err := ParseBool("shortcut-norm", s)
					l.NoShortcutNorm = !b
					return err
				}},
			{"after", "activation after the addition, or none",
				func(l *Layer) string {
					if !l.HasPostAct {
						return "none"
					}
					return l.PostAct.String()
				},
				func(l *Layer, s string) error {
					if strings.EqualFold(strings.TrimSpace(s), "none") {
						l.HasPostAct = false
						return nil
					}
					i, err := ParseChoice("after", s, names(ActKinds()))
					if err != nil {
						return &FieldError{"after", s, "give none or one of " + strings.Join(names(ActKinds()), ", ")}
					}
					l.PostAct, l.HasPostAct = ActKind(i), true
					return nil
				}},
			{"strides", "first (later repeats run with stride 1) or all",
				func(l *Layer) string {
					if l.AllStrides {
						return "all"
					}
					return "first"
				},
				func(l *Layer, s string) error {
					i, err := ParseChoice("strides", s, []string{"first", "all"})
					l.AllStrides = i == 1
					return err
				}}}
	case KindConcat, KindAdd:
		fs = []Field{{"from", "name of an earlier layer or block",
			func(l *Layer) string { return l.From },
			func(l *Layer, s string) error {
				t := strings.TrimSpace(s)
				if !ValidName(t) {
					return &FieldError{"from", s, "give the name of an earlier layer or block"}
				}
				l.From = t
				return nil
			}},
			{"crop", "yes or no (center-crop the larger map)",
				func(l *Layer) string { return yesNo(l.Crop) },
				func(l *Layer, s string) (err error) { l.Crop, err = ParseBool("crop", s); return }}}
	}
	return append(fs,
		Field{"name", "short identifier (letters, digits, _ and -), or empty",
			func(l *Layer) string { return l.Name },
			func(l *Layer, s string) error {
				t := strings.TrimSpace(s)
				if t != "" && !ValidName(t) {
					return &FieldError{"name", s, "use letters, digits, '_' and '-', starting with a letter, at most 32 characters"}
				}
				l.Name = t
				return nil
			}},
		Field{"note", "free text",
			func(l *Layer) string { return l.Note },
			func(l *Layer, s string) error {
				if len(s) > 4096 {
					return &FieldError{"note", s[:32] + "…", "keep it under 4096 bytes"}
				}
				l.Note = s
				return nil
			}})
}
