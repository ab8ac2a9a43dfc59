package textsafe

import (
	"strings"
	"testing"
	"unicode/utf8"
)

// The sequences below are the ones terminals act on, as ECMA-48 (5th
// edition, 1991) defines them: ESC (0x1B) starts an escape sequence, ESC [
// or the 8-bit C1 code 0x9B a control sequence (CSI, e.g. "ESC [2J" erases
// the screen), ESC ] an operating-system command (OSC; xterm's "OSC 0;
// text BEL" sets the window title, from xterm's ctlseqs document), BEL
// (0x07) rings or ends an OSC, BS (0x08) and CR (0x0D) move the cursor
// back over what was shown. The escapes written for them follow Go's
// strconv.Quote notation (the Go specification's rune literals). Both
// documents are cited from memory.
func TestLine(t *testing.T) {
	for _, tc := range []struct{ name, in, want string }{
		{"plain", "conv 32 k3 [stem]", "conv 32 k3 [stem]"},
		{"empty", "", ""},
		{"unicode kept", "3×224×224 · café → naïve ✗ 漢字 😀", "3×224×224 · café → naïve ✗ 漢字 😀"},
		{"ESC", "a\x1bb", `a\x1bb`},
		{"OSC title set", "\x1b]0;pwned\x07", `\x1b]0;pwned\a`},
		{"OSC ended by ST", "\x1b]8;;http://x\x1b\\link", `\x1b]8;;http://x\x1b\link`},
		{"CSI clear", "\x1b[2J\x1b[H", `\x1b[2J\x1b[H`},
		{"SGR colour", "\x1b[31mred\x1b[0m", `\x1b[31mred\x1b[0m`},
		{"BEL", "ding\a", `ding\a`},
		{"backspace", "abc\b\b\bxyz", `abc\b\b\bxyz`},
		{"CR overwrite", "ok\rFAIL", `ok\rFAIL`},
		{"DEL", "a\x7fb", `a\x7fb`},
		{"NUL", "a\x00b", `a\x00b`},
		{"other C0", "\x01\x0e\x1f\v\f", `\x01\x0e\x1f\v\f`},
		{"tab", "a\tb", `a\tb`},
		{"newline", "a\nb\r\n", `a\nb\r\n`},
		{"8-bit CSI byte", "a\x9b2Jb", `a\x9b2Jb`},      // not UTF-8 on its own
		{"C1 CSI as UTF-8", "a\u009b2Jb", `a\u009b2Jb`}, // U+009B, which some terminals obey
		{"C1 NEL and OSC", "\u0085\u009d0;t\u009c", `\u0085\u009d0;t\u009c`},
		{"invalid UTF-8", "ok\xff\xfe\xc3(", `ok\xff\xfe\xc3(`},
		{"truncated rune", "caf\xc3", `caf\xc3`},
		{"overlong slash", "\xc0\xaf", `\xc0\xaf`},
		{"surrogate bytes", "\xed\xa0\x80", `\xed\xa0\x80`},
		{"replacement char kept", "\ufffd", "\ufffd"},
		{"bidi override", "abc\u202eexe.yaml", `abc\u202eexe.yaml`},
		{"bidi isolate", "\u2067x\u2069", `\u2067x\u2069`},
		{"line separator", "a\u2028b\u2029c", `a\u2028b\u2029c`},
		{"BOM", "\ufeffname", `\ufeffname`},
		{"backslash kept", `C:\nets\a.yaml`, `C:\nets\a.yaml`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := Line(tc.in)
			if got != tc.want {
				t.Errorf("Line(%q) = %q, want %q", tc.in, got, tc.want)
			}
			if Line(got) != got {
				t.Errorf("escaping twice changes %q to %q", got, Line(got))
			}
			if Safe(tc.in) != (got == tc.in) {
				t.Errorf("Safe(%q) = %v", tc.in, Safe(tc.in))
			}
			checkShowable(t, got, false)
		})
	}
}

func TestText(t *testing.T) {
	for _, tc := range []struct{ name, in, want string }{
		{"lines kept", "a.yaml:1:1: bad\na.yaml:2:1: worse", "a.yaml:1:1: bad\na.yaml:2:1: worse"},
		{"tab kept", "a\tb", "a\tb"},
		{"CR escaped", "line\r\nnext", "line\\r\nnext"},
		{"ESC escaped", "x\x1b[2Jy\n", "x\\x1b[2Jy\n"},
		{"OSC escaped", "\x1b]0;pwned\x07", `\x1b]0;pwned\a`},
		{"invalid UTF-8", "\xff\n", "\\xff\n"},
		{"C1", "\u009b", `\u009b`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := Text(tc.in)
			if got != tc.want {
				t.Errorf("Text(%q) = %q, want %q", tc.in, got, tc.want)
			}
			checkShowable(t, got, true)
		})
	}
}

// TestNoCopy checks that text with nothing to escape comes back as it is,
// without an allocation.
func TestNoCopy(t *testing.T) {
	s := "conv 64 k3 s2 p1 [stem] · 3×224×224 café"
	if n := testing.AllocsPerRun(100, func() { _ = Line(s); _ = Text(s) }); n != 0 {
		t.Errorf("%v allocations for clean text", n)
	}
}

// TestEveryByte runs Line over every single byte and every rune up to
// U+3000: the result is valid UTF-8 with nothing a terminal acts on.
func TestEveryByte(t *testing.T) {
	for c := 0; c < 256; c++ {
		checkShowable(t, Line(string([]byte{byte(c)})), false)
		checkShowable(t, Text(string([]byte{byte(c)})), true)
	}
	for r := rune(0); r < 0x3000; r++ {
		checkShowable(t, Line(string(r)), false)
	}
}

// FuzzLine checks the promise for any input: valid UTF-8 with no control
// character, idempotent, and unchanged when Safe says so.
func FuzzLine(f *testing.F) {
	for _, s := range []string{"", "plain", "\x1b]0;pwned\x07", "\x9b", "a\u009bb", "\xff", "×"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got := Line(s)
		checkShowable(t, got, false)
		checkShowable(t, Text(s), true)
		if Line(got) != got {
			t.Errorf("not idempotent: %q", s)
		}
		if Safe(s) != (got == s) {
			t.Errorf("Safe(%q) disagrees with Line", s)
		}
	})
}

// checkShowable fails unless s is valid UTF-8 holding no control character
// (bar line feed and tab when multi) and none of the other escaped runes.
func checkShowable(t *testing.T, s string, multi bool) {
	t.Helper()
	if !utf8.ValidString(s) {
		t.Errorf("%q is not valid UTF-8", s)
	}
	for _, r := range s {
		if multi && (r == '\n' || r == '\t') {
			continue
		}
		if escaped(r) {
			t.Errorf("%q still holds %U", s, r)
		}
	}
	if strings.ContainsRune(s, 0x1b) {
		t.Errorf("%q holds ESC", s)
	}
}
