package engine

import (
	"fmt"
	"strconv"
	"strings"
)

// ParamType says how a field's value is written and read.
type ParamType uint8

// Field types.
const (
	TInt    ParamType = iota // a whole number in [Lo, Hi]
	TPair                    // n or h×w, each in [Lo, Hi]; [h, w] in stack files
	TFloat                   // a real number in [FLo, FHi)
	TBool                    // yes or no; true or false in stack files
	TChoice                  // one of Choices (Value.Int is the index; −1 is None)
	TPad                     // n, h×w, same or valid
	TGroups                  // a whole number or depthwise
	TShape                   // C×H×W; [C, H, W] in stack files
	TRef                     // the name of an earlier layer or block
	TToggle                  // yes, no or default (an optional boolean)
	TWidth                   // a width: n in [Lo, Hi], xF (F times an input) or /D (an input divided by D)
)

// Value is a field's value; which part is used depends on the ParamType:
// Int (TInt, TChoice, TToggle, TGroups), Pair (TPair), Float (TFloat),
// Bool (TBool, and depthwise for TGroups), Text (TRef), Pad (TPad) and
// Shape (TShape).
type Value struct {
	Int   int64
	Pair  Pair
	Float float64
	Bool  bool
	Text  string
	Pad   Padding
	Shape Shape
	Rel   Rel // TWidth: a relative width (zero: Int is the width)
}

// Param describes one field of a layer kind.
type Param struct {
	Key  string // stack-file key and form label
	Help string // what the form accepts, e.g. "n or h×w, e.g. 3 or 3x5"
	Type ParamType
	// Lo and Hi bound TInt, TPair and TGroups values (and TPad sizes);
	// FLo and FHi bound TFloat values to [FLo, FHi).
	Lo, Hi   int64
	FLo, FHi float64
	// Choices are the words of a TChoice; None, when set, is the word for
	// "no choice" (Value.Int −1), which a stack file writes by leaving the
	// key out.
	Choices []string
	None    string
	// Want is what a refused value should have been, when the type's
	// general wording does not fit ("give a number from 0, e.g. 0.2").
	Want string
	// Label names a main value in stack-file messages ("filters").
	Label string
	// Need says what is missing when a required value is left out
	// ("a kernel"); YAMLHint and QuickHint show how to add it.
	Need, YAMLHint, QuickHint string

	// Quick is the field's prefix in quick entry and the summary line
	// ("k" for k3, "then " for "then relu", "×" for a block's ×2); a main
	// value's prefix is optional when reading.
	Quick string
	// Words are the quick-entry and summary words of a TBool (false,
	// true), TToggle (unset, on, off), TChoice (one per choice) or the
	// word forms of TPad (same, valid) and TGroups (depthwise); "" where
	// the value has no word. Nil for a TChoice means the choices
	// themselves. A field with neither Quick nor Words (nor QuickBare) is
	// left out of quick entry and the summary line.
	Words []string
	// QuickBare: a bare number in quick entry sets this field.
	QuickBare bool

	// Required fields must be given (when they apply); the stack file
	// always writes them.
	Required bool
	// An Optional TRef accepts empty text: no name (a branch's from).
	// Optional main values may be left out of quick entry (and a Bare
	// kind's main value out of a stack file): they take Default.
	Optional bool
	Default  Value
	// FileDefault: a stack's defaults may set the field for every layer of
	// the kind that leaves it unwritten (Defaults); its zero Value means
	// unwritten, and Layer.Normalized keeps any other value as written.
	FileDefault bool
	// Only, when set, says when the field applies; OnlyMsg is the stack
	// file's complaint and OnlyQuick quick entry's when it is given
	// elsewhere.
	Only      func(*Layer) bool
	OnlyMsg   string
	OnlyQuick string

	get  func(*Layer) Value
	set  func(*Layer, Value)
	show func(*Layer) Value // the value a form shows (defaults applied); nil: get
}

// Get returns the field's value as stored in l (zero means default).
func (p *Param) Get(l *Layer) Value { return p.get(l) }

// Set stores v in l.
func (p *Param) Set(l *Layer, v Value) { p.set(l, v) }

// Applies reports whether the field means something for l.
func (p *Param) Applies(l *Layer) bool { return p.Only == nil || p.Only(l) }

// IsDefault reports whether the field holds its default in the normalized
// layer l, so that the stack file and the summary may leave it out.
func (p *Param) IsDefault(l *Layer) bool {
	v := p.get(l)
	switch p.Type {
	case TBool:
		return v.Bool == p.Default.Bool
	case TChoice:
		if p.None != "" {
			return v.Int < 0
		}
		return v.Int == p.Default.Int
	case TGroups:
		return !v.Bool && v.Int <= 1
	}
	return v == p.Default
}

// Text writes v as a form shows it.
func (p *Param) Text(v Value) string {
	switch p.Type {
	case TInt:
		return strconv.FormatInt(v.Int, 10)
	case TPair:
		return pairText(v.Pair)
	case TFloat:
		return strconv.FormatFloat(v.Float, 'g', -1, 64)
	case TBool:
		return yesNo(v.Bool)
	case TChoice:
		if v.Int < 0 || int(v.Int) >= len(p.Choices) {
			return p.None
		}
		return p.Choices[v.Int]
	case TPad:
		return padText(v.Pad)
	case TGroups:
		if v.Bool {
			return "depthwise"
		}
		return strconv.FormatInt(max(v.Int, 1), 10)
	case TShape:
		return shapeText(v.Shape)
	case TRef:
		return v.Text
	case TWidth:
		return widthText(v)
	case TToggle:
		switch Toggle(v.Int) {
		case On:
			return "yes"
		case Off:
			return "no"
		}
		return "default"
	}
	return ""
}

// Parse reads a form's text into a value, or a *FieldError naming the
// field and what it accepts.
func (p *Param) Parse(s string) (Value, error) {
	var v Value
	var err error
	t := strings.TrimSpace(s)
	switch p.Type {
	case TInt:
		v.Int, err = ParseInt(p.Key, s, p.Lo, p.Hi)
	case TPair:
		v.Pair, err = ParsePair(p.Key, s, p.Lo, p.Hi)
	case TFloat:
		v.Float, err = parseFloatIn(p.Key, s, p.FLo, p.FHi)
	case TBool:
		v.Bool, err = ParseBool(p.Key, s)
	case TChoice:
		if p.None != "" && strings.EqualFold(t, p.None) {
			v.Int = -1
			return v, nil
		}
		var i int
		i, err = ParseChoice(p.Key, s, p.Choices)
		v.Int = int64(i)
	case TPad:
		v.Pad, err = ParsePadding(p.Key, s)
	case TGroups:
		if strings.EqualFold(t, "depthwise") || strings.EqualFold(t, "dw") {
			v.Bool = true
			return v, nil
		}
		v.Int, err = ParseInt(p.Key, s, p.Lo, p.Hi)
	case TShape:
		v.Shape, err = ParseShape(p.Key, s)
	case TWidth:
		v, err = parseWidth(p.Key, s, p.Hi)
	case TRef:
		if !ValidName(t) && !(t == "" && p.Optional) {
			err = &FieldError{p.Key, s, ""}
		}
		v.Text = t
	case TToggle:
		if strings.EqualFold(t, "default") {
			return v, nil
		}
		var b bool
		b, err = ParseBool(p.Key, s)
		v.Int = int64(Off)
		if b {
			v.Int = int64(On)
		}
	}
	if err != nil {
		if fe, ok := err.(*FieldError); ok && p.Want != "" {
			fe.Want = p.Want
			if p.Type == TChoice {
				fe.Want += didYouMean(t, p.Choices)
			}
		}
		return Value{}, err
	}
	return v, nil
}

// parseFloatIn reads a number in [lo, hi).
func parseFloatIn(key, s string, lo, hi float64) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || v != v || v < lo || v >= hi {
		return 0, &FieldError{key, s, fmt.Sprintf("give a number at least %g and below %g", lo, hi)}
	}
	return v, nil
}

// Field is one editable property of a layer, read and written as text (the
// editor's forms use these).
type Field struct {
	Key  string // short name, e.g. "kernel"
	Help string // what it accepts, e.g. "n or h×w, e.g. 3 or 3x5"
	Get  func(*Layer) string
	Set  func(*Layer, string) error
	// Applies, when set, says whether the field means something for a
	// layer (forms hide it otherwise).
	Applies func(*Layer) bool
	// Limit is the longest text the field holds, in bytes: the limit
	// the stack file has for it. 0: none of its own (a number or a word,
	// which Set judges).
	Limit int
}

// Field turns the parameter into a form field.
func (p *Param) Field() Field {
	return Field{Key: p.Key, Help: p.Help, Applies: p.Only,
		Get: func(l *Layer) string {
			if p.show != nil {
				return p.Text(p.show(l))
			}
			return p.Text(p.get(l))
		},
		Set: func(l *Layer, s string) error {
			v, err := p.Parse(s)
			if err != nil {
				return err
			}
			p.set(l, v)
			return nil
		}}
}

// FieldsFor returns the editable fields of a kind, in form order: its main
// value, its fields, then name and note.
func FieldsFor(k Kind) []Field {
	s := SpecOf(k)
	fs := make([]Field, 0, len(s.Params)+3)
	if s.Main != nil {
		fs = append(fs, s.Main.Field())
	}
	for i := range s.Params {
		fs = append(fs, s.Params[i].Field())
	}
	return append(fs, nameField, noteField)
}

// nameField is the optional layer name every kind takes; empty clears it.
var nameField = Field{Key: "name", Help: "short identifier (letters, digits, _ and -), or empty", Limit: MaxNameLen,
	Get: func(l *Layer) string { return l.Name },
	Set: func(l *Layer, s string) error {
		t := strings.TrimSpace(s)
		if t != "" && !ValidName(t) {
			return &FieldError{"name", s, "use letters, digits, '_' and '-', starting with a letter, at most 32 characters"}
		}
		l.Name = t
		return nil
	}}

// noteField is the free-text note every kind takes.
var noteField = Field{Key: "note", Help: "free text", Limit: MaxNoteLen,
	Get: func(l *Layer) string { return l.Note },
	Set: func(l *Layer, s string) error {
		if len(s) > MaxNoteLen {
			return &FieldError{"note", s[:32] + "…", fmt.Sprintf("keep it to %d bytes", MaxNoteLen)}
		}
		l.Note = s
		return nil
	}}

// MaxNoteLen is the longest note a layer or stack may carry, in bytes.
const MaxNoteLen = 4096

// MaxStackNameLen is the longest name a stack may carry, in bytes.
const MaxStackNameLen = 200

func shapeText(s Shape) string {
	return strconv.FormatInt(s.C, 10) + "x" + strconv.FormatInt(s.H, 10) + "x" + strconv.FormatInt(s.W, 10)
}
