package report

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"

	"stackfit/engine"
)

// This file writes the per-layer lines of the JSON report by hand. The
// bytes are exactly what encoding/json writes for a JSONLayer (the test
// TestLayerEncoderMatchesEncodingJSON holds the two together); writing
// them directly skips reflection and the JSONLayer copy, which made up
// most of the report's time on a stack of a few hundred rows.

// appendLayer appends row i of an analysis as one JSON object, the same
// bytes json.Marshal writes for the JSONLayer BuildJSON makes of it.
func appendLayer(b []byte, an *engine.Analysis, i int) ([]byte, error) {
	r := an.Result
	row := &r.Rows[i]
	b = append(b, `{"path":"`...)
	b = append(row.Path.AppendTo(b), '"') // digits, dots and letters: nothing to escape
	b = append(b, `,"kind":`...)
	b = appendString(b, row.Layer.Kind.String())
	b = append(b, `,"name":`...)
	b = appendString(b, row.Layer.Name)
	b = append(b, `,"role":`...)
	b = appendString(b, row.Role.String())
	b = append(b, `,"status":`...)
	b = appendString(b, row.Status.String())
	b = append(b, `,"out":`...)
	if row.Status == engine.StatusOK {
		b = appendInts(b, row.Out.C, row.Out.H, row.Out.W)
	} else {
		b = append(b, "null"...)
	}
	b = append(b, `,"params":`...)
	b = strconv.AppendInt(b, row.Params, 10)
	b = append(b, `,"buffers":`...)
	b = strconv.AppendInt(b, row.Buffers, 10)
	b = append(b, `,"macs":`...)
	b = strconv.AppendInt(b, row.MACs, 10)
	b = append(b, `,"act_bytes":`...)
	var act int64
	if i < len(an.Memory.Rows) {
		act = an.Memory.Rows[i]
	}
	b = strconv.AppendInt(b, act, 10)
	var err error
	b = append(b, `,"rf":`...)
	if b, err = appendFloats(b, row.RF.H, row.RF.W); err != nil {
		return b, fmt.Errorf("layer %s rf: %w", row.Path, err)
	}
	b = append(b, `,"jump":`...)
	if b, err = appendFloats(b, row.Jump.H, row.Jump.W); err != nil {
		return b, fmt.Errorf("layer %s jump: %w", row.Path, err)
	}
	diags := r.DiagsFor(i)
	b = append(b, `,"errors":`...)
	b = appendMessages(b, diags, func(s engine.Severity) bool { return s == engine.SevError })
	b = append(b, `,"warnings":`...)
	b = appendMessages(b, diags, func(s engine.Severity) bool { return s == engine.SevWarning })
	b = append(b, `,"notes":`...)
	b = appendMessages(b, diags, func(s engine.Severity) bool { return s != engine.SevError && s != engine.SevWarning })
	return append(b, '}'), nil
}

// appendMessages appends the messages of the diagnostics whose severity
// keep accepts, as a JSON array of strings.
func appendMessages(b []byte, diags []engine.Diagnostic, keep func(engine.Severity) bool) []byte {
	b = append(b, '[')
	n := 0
	for _, d := range diags {
		if !keep(d.Severity) {
			continue
		}
		if n > 0 {
			b = append(b, ',')
		}
		b = appendString(b, d.Message())
		n++
	}
	return append(b, ']')
}

func appendInts(b []byte, v ...int64) []byte {
	b = append(b, '[')
	for i, x := range v {
		if i > 0 {
			b = append(b, ',')
		}
		b = strconv.AppendInt(b, x, 10)
	}
	return append(b, ']')
}

func appendFloats(b []byte, h, w float64) ([]byte, error) {
	var err error
	b = append(b, '[')
	if b, err = appendFloat(b, h); err != nil {
		return b, err
	}
	b = append(b, ',')
	if b, err = appendFloat(b, w); err != nil {
		return b, err
	}
	return append(b, ']'), nil
}

// appendFloat writes f as encoding/json does: the shortest decimal that
// reads back as f, in plain notation between 1e-6 and 1e21 and in
// exponent notation (with the exponent's leading zero dropped) outside it.
// Like encoding/json it refuses NaN and the infinities.
func appendFloat(b []byte, f float64) ([]byte, error) {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return b, fmt.Errorf("%v has no JSON form", f)
	}
	// Receptive fields and jumps are nearly always whole numbers: those
	// print as integers, exactly as the general path would print them.
	if f == math.Trunc(f) && math.Abs(f) < 1<<53 && (f != 0 || !math.Signbit(f)) {
		return strconv.AppendInt(b, int64(f), 10), nil
	}
	format := byte('f')
	if a := math.Abs(f); a != 0 && (a < 1e-6 || a >= 1e21) {
		format = 'e'
	}
	b = strconv.AppendFloat(b, f, format, -1, 64)
	if format == 'e' {
		// e-09 → e-9
		if n := len(b); n >= 4 && b[n-4] == 'e' && b[n-3] == '-' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
	}
	return b, nil
}

const hexDigits = "0123456789abcdef"

// appendString writes s as a JSON string the way encoding/json does by
// default: <, > and & escaped for safe embedding in HTML, invalid UTF-8
// replaced by U+FFFD, and U+2028 and U+2029 escaped.
func appendString(b []byte, s string) []byte {
	b = append(b, '"')
	start := 0
	for i := 0; i < len(s); {
		if c := s[i]; c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' && c != '<' && c != '>' && c != '&' {
				i++
				continue
			}
			b = append(b, s[start:i]...)
			switch c {
			case '"', '\\':
				b = append(b, '\\', c)
			case '\b':
				b = append(b, '\\', 'b')
			case '\f':
				b = append(b, '\\', 'f')
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xF])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			b = append(b, s[start:i]...)
			b = append(b, `\ufffd`...)
			i += size
			start = i
			continue
		}
		if r == '\u2028' || r == '\u2029' {
			b = append(b, s[start:i]...)
			b = append(b, '\\', 'u', '2', '0', '2', hexDigits[r&0xF])
			i += size
			start = i
			continue
		}
		i += size
	}
	b = append(b, s[start:]...)
	return append(b, '"')
}
