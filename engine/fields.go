package engine

import (
	"errors"
	"fmt"
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
	return 0, &FieldError{key, s, "give one of " + strings.Join(options, ", ") + didYouMean(t, options)}
}

// didYouMean is "; did you mean \"x\"?" for the option s is likely a slip
// for (Suggest), or "".
func didYouMean(s string, options []string) string {
	if hint := Suggest(s, options); hint != "" {
		return fmt.Sprintf("; did you mean %q?", hint)
	}
	return ""
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
