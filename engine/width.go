package engine

import (
	"math"
	"strconv"
	"strings"
)

// Rel is a width written relative to an input: Mul times its channels
// ("x6"), or its channels divided by Div, rounded down ("/4"). The zero
// Rel means the width is absolute.
type Rel struct {
	Mul float64
	Div int64
}

// IsZero reports whether the width is absolute.
func (r Rel) IsZero() bool { return r.Mul == 0 && r.Div == 0 }

// String writes the width as the stack file does: "x6", "x0.25" or "/4".
func (r Rel) String() string {
	if r.Div > 0 {
		return "/" + strconv.FormatInt(r.Div, 10)
	}
	return "x" + strconv.FormatFloat(r.Mul, 'g', -1, 64)
}

// MaxRelMul bounds a relative width's factor.
const MaxRelMul = 1024

// parseWidth reads "64", "x6", "×6", "x0.25" or "/4".
func parseWidth(key, s string, hi int64) (Value, error) {
	t := strings.TrimSpace(s)
	want := "give a whole number such as 64, a factor of the input such as x6 or x0.25, or a divisor such as /4"
	switch {
	case strings.HasPrefix(t, "x") || strings.HasPrefix(t, "×") || strings.HasPrefix(t, "X"):
		t = strings.TrimLeft(t, "x×X")
		v, err := strconv.ParseFloat(t, 64)
		if err != nil || !(v > 0) || v > MaxRelMul {
			return Value{}, &FieldError{key, s, want + " (factors above 0 and at most 1024)"}
		}
		return Value{Rel: Rel{Mul: v}}, nil
	case strings.HasPrefix(t, "/"):
		v, err := strconv.ParseInt(strings.TrimSpace(t[1:]), 10, 64)
		if err != nil || v < 1 || v > MaxChannels {
			return Value{}, &FieldError{key, s, want + " (divisors from 1)"}
		}
		return Value{Rel: Rel{Div: v}}, nil
	}
	n, err := ParseInt(key, s, 1, hi)
	if err != nil {
		if t != "" && (t[0] == '-' || t[0] >= '0' && t[0] <= '9') {
			return Value{}, err // a number out of range: say the range
		}
		return Value{}, &FieldError{key, s, want}
	}
	return Value{Int: n}, nil
}

// widthText writes an absolute or relative width.
func widthText(v Value) string {
	if !v.Rel.IsZero() {
		return v.Rel.String()
	}
	return strconv.FormatInt(v.Int, 10)
}

// MakeDivisible rounds v to the nearest multiple of divisor, never below
// divisor and never more than 10% below v: the MobileNet family's channel
// rounding as torchvision's model source writes it (_make_divisible in
// torchvision/models/_utils.py, after the TensorFlow MobileNet code).
func MakeDivisible(v float64, divisor int64) int64 {
	d := float64(divisor)
	n := math.Max(d, math.Floor((v+d/2)/d)*d)
	if n < 0.9*v {
		n += d
	}
	if n > float64(MaxChannels)*2 {
		return MaxChannels * 2
	}
	return int64(n)
}

// ResolveWidth turns a width into channels for an input of in channels:
// the absolute width n, or in·Mul rounded to the nearest whole number
// (halves to even, as Python's round does), or ⌊in/Div⌋; with roundTo > 0
// the relative value is then rounded by MakeDivisible. It may return 0 or
// less, which the caller reports.
func ResolveWidth(n int64, r Rel, roundTo, in int64) int64 {
	var v float64
	switch {
	case r.Div > 0:
		v = float64(in / r.Div)
	case r.Mul > 0:
		v = float64(in) * r.Mul
		if roundTo <= 0 {
			v = math.RoundToEven(v)
		}
	default:
		return n
	}
	if roundTo > 0 {
		return MakeDivisible(v, roundTo)
	}
	if v > float64(MaxChannels)*2 {
		return MaxChannels * 2
	}
	return int64(v)
}

// width resolves the layer's width in this row and checks it: a relative
// width reads the input of the enclosing body (or block), recorded while
// the enclosing items were entered, or the row's own input.
func (c *calc) width(field string) (int64, bool) {
	l := c.l
	if l.Rel.IsZero() {
		return l.Filters, c.atLeast(field, l.Filters, 1)
	}
	lvl := min(c.row.Path.Len()/2, len(c.r.ref)-1)
	ref := c.r.ref[lvl]
	switch {
	case l.RelInput:
		ref = c.row.In.C
	case l.RelBlock:
		ref = c.r.blockRef[lvl]
	}
	n := ResolveWidth(0, l.Rel, l.RoundTo, ref)
	if n < 1 {
		c.fail(Diagnostic{Code: ErrWidthZero, Field: field, A: ref, B: n})
		return 0, false
	}
	if n > MaxChannels {
		c.fail(Diagnostic{Code: ErrValue, Field: field, A: n, B: 1})
		return 0, false
	}
	return n, true
}

// widthParams are the fields of a relative width, shared by the weighted
// kinds: what it is relative to and its rounding.
var widthParams = []Param{
	{Key: "relative-to", Help: "body (the enclosing block repeat, gate or branch's input), block (the enclosing repeat's input) or input (this layer's own input)",
		Type: TChoice, Choices: []string{"body", "block", "input"}, Words: []string{"", "of-block", "of-input"},
		Only:      func(l *Layer) bool { return !l.Rel.IsZero() },
		OnlyMsg:   "relative-to needs a relative width such as x6 or /4",
		OnlyQuick: "needs a relative width such as x6 or /4",
		get: func(l *Layer) Value {
			switch {
			case l.RelInput:
				return Value{Int: 2}
			case l.RelBlock:
				return Value{Int: 1}
			}
			return Value{}
		},
		set: func(l *Layer, v Value) { l.RelBlock, l.RelInput = v.Int == 1, v.Int == 2 }},
	{Key: "round", Help: "round a relative width to a multiple of this (8 in the MobileNet family), or 0 for none",
		Type: TInt, Lo: 0, Hi: 1024, Quick: "round",
		Only:      func(l *Layer) bool { return !l.Rel.IsZero() },
		OnlyMsg:   "round needs a relative width such as x6 or /4",
		OnlyQuick: "needs a relative width such as x6 or /4",
		get:       func(l *Layer) Value { return Value{Int: l.RoundTo} },
		set:       func(l *Layer, v Value) { l.RoundTo = v.Int }},
}

// widthLine explains a relative width in a row's arithmetic.
func widthLine(row *Row) string {
	l := row.Layer
	of := "the enclosing body's input"
	switch {
	case l.RelInput:
		of = "this layer's input"
	case l.RelBlock:
		of = "the enclosing block repeat's input"
	}
	how := "× " + strconv.FormatFloat(l.Rel.Mul, 'g', -1, 64)
	if l.Rel.Div > 0 {
		how = "/ " + strconv.FormatInt(l.Rel.Div, 10) + " (rounded down)"
	}
	s := "width = channels of " + of + " " + how
	if l.RoundTo > 0 {
		s += ", then to a multiple of " + strconv.FormatInt(l.RoundTo, 10) + " (never more than 10% down)"
	}
	return s + " = " + strconv.FormatInt(row.Out.C, 10)
}
