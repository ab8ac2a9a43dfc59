// Package textsafe makes text from a stack file, a file name or a message
// quoting them safe to show on a terminal: every character that a terminal
// would act on rather than show (escape sequences, other control
// characters, invalid UTF-8) is written as a visible escape, in the
// notation of Go and Python string literals: \x1b for ESC, \a for BEL,
// \r for a carriage return, \u009b for the C1 control CSI, \xff for a byte
// that is not UTF-8. Ordinary printable text, "×" and accented letters
// included, comes back unchanged, and a string with nothing to escape
// comes back without a copy.
//
// A backslash itself is not escaped, so the result is plain to read and
// escaping twice changes nothing; the price is that a name which really
// holds the four characters \x1b reads the same as one holding ESC, which
// is harmless on a screen.
//
// The package is pure: no I/O and no state.
package textsafe

import (
	"strconv"
	"strings"
	"unicode/utf8"
)

// Line returns s ready for one line of a terminal: control characters,
// tab and line feed included, the Unicode controls that reorder or break
// a line (bidirectional overrides and isolates, the line and paragraph
// separators, the byte-order mark) and bytes that are not UTF-8 become
// visible escapes.
func Line(s string) string { return clean(s, false) }

// Text is Line for text that may span several lines (an error list, say):
// line feeds and tabs are kept, everything else Line escapes is escaped.
// A carriage return is escaped, so no text can overwrite a line already
// shown.
func Text(s string) string { return clean(s, true) }

// Safe reports whether s shows as itself on one line, that is whether
// Line(s) == s.
func Safe(s string) bool { return plainPrefix(s, false) == len(s) }

// clean escapes what s must not show raw; multi keeps line feeds and tabs.
func clean(s string, multi bool) string {
	i := plainPrefix(s, multi)
	if i == len(s) {
		return s
	}
	var b strings.Builder
	b.Grow(len(s) + 16)
	b.WriteString(s[:i])
	for i < len(s) {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n <= 1:
			b.WriteString(`\x`)
			writeHex(&b, uint32(s[i]), 2)
		case multi && (r == '\n' || r == '\t'):
			b.WriteByte(byte(r))
		case escaped(r):
			writeEscape(&b, r)
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}

// plainPrefix returns the length of the longest start of s that needs no
// escape.
func plainPrefix(s string, multi bool) int {
	i := 0
	for i < len(s) {
		c := s[i]
		switch {
		case c >= 0x20 && c < 0x7f:
			i++
		case multi && (c == '\n' || c == '\t'):
			i++
		case c >= utf8.RuneSelf:
			r, n := utf8.DecodeRuneInString(s[i:])
			if (r == utf8.RuneError && n <= 1) || escaped(r) {
				return i
			}
			i += n
		default:
			return i
		}
	}
	return i
}

// escaped reports whether r is shown as an escape: the C0 controls, DEL,
// the C1 controls (U+0080–U+009F, which include the 8-bit CSI, OSC and
// string terminator), the bidirectional formatting characters (which
// reorder the text after them), the line and paragraph separators, and
// the byte-order mark (invisible).
func escaped(r rune) bool {
	switch {
	case r < 0x20, r >= 0x7f && r < 0xa0:
		return true
	case r == 0x061c, r == 0x200e, r == 0x200f: // Arabic letter mark, LRM, RLM
		return true
	case r >= 0x2028 && r <= 0x202e: // LS, PS, LRE, RLE, PDF, LRO, RLO
		return true
	case r >= 0x2066 && r <= 0x2069: // LRI, RLI, FSI, PDI
		return true
	case r == 0xfeff:
		return true
	}
	return false
}

// writeEscape writes r in the notation of a Go or Python string literal.
func writeEscape(b *strings.Builder, r rune) {
	switch r {
	case '\a':
		b.WriteString(`\a`)
	case '\b':
		b.WriteString(`\b`)
	case '\f':
		b.WriteString(`\f`)
	case '\n':
		b.WriteString(`\n`)
	case '\r':
		b.WriteString(`\r`)
	case '\t':
		b.WriteString(`\t`)
	case '\v':
		b.WriteString(`\v`)
	default:
		if r < utf8.RuneSelf {
			b.WriteString(`\x`)
			writeHex(b, uint32(r), 2)
		} else {
			b.WriteString(`\u`)
			writeHex(b, uint32(r), 4)
		}
	}
}

// writeHex writes v as exactly digits lower-case hexadecimal digits.
func writeHex(b *strings.Builder, v uint32, digits int) {
	h := strconv.FormatUint(uint64(v), 16)
	for i := len(h); i < digits; i++ {
		b.WriteByte('0')
	}
	b.WriteString(h)
}
