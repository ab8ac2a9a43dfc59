package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine/textsafe"
)

// hostileFile is a file name holding xterm's window-title command (OSC 0 ;
// text BEL) and the erase-display sequence (CSI 2 J), from memory of
// ECMA-48 and xterm's control-sequence list; shown, it must read as
// visible escapes.
const (
	hostileFile    = "a\x1b]0;pwned\x07\x1b[2J.yaml"
	hostileVisible = `a\x1b]0;pwned\a\x1b[2J.yaml`
)

// safeOutput fails unless every line of out is terminal-safe.
func safeOutput(t *testing.T, what, out string) {
	t.Helper()
	for i, line := range strings.Split(out, "\n") {
		if !textsafe.Safe(line) {
			t.Errorf("%s line %d holds a control character: %q", what, i+1, line)
		}
	}
}

func TestMessagesShowHostileFileNamesSafely(t *testing.T) {
	dir := t.TempDir()
	// A stack with an error (a kernel larger than the map) and a hostile
	// stack name and note (YAML's \e and \a escapes).
	bad := "stackfit: 1\nname: \"n\\e]0;pwned\\a\\e[2J\"\nnote: \"x\\e[2J\"\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: 9}]\n"
	file := filepath.Join(dir, hostileFile)
	if err := os.WriteFile(file, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	unreadable := filepath.Join(dir, "b\x1b[2J.yaml")
	if err := os.WriteFile(unreadable, []byte("stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: \"\\e[2J\"}]\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		args []string
		want string // in the output or the errors, visible
	}{
		{"check lines", []string{"check", file}, hostileVisible + ": error: layer 1 (conv)"},
		{"text report", []string{"report", file}, `n\x1b]0;pwned\a\x1b[2J  ·  input 3×8×8`},
		{"markdown report", []string{"report", file, "--format", "markdown"}, `## n\\x1b\]0;pwned\\a\\x1b\[2J`},
		{"csv report", []string{"report", file, "--format", "csv"}, "path,layer"},
		{"export refused", []string{"export", file}, hostileVisible + " lists them"},
		{"missing file", []string{"report", filepath.Join(dir, "missing"+hostileFile)}, "missing" + hostileVisible},
		{"bad file", []string{"check", unreadable}, `b\x1b[2J.yaml:3:`},
		{"unknown flag", []string{"report", file, "--x\x1b[2J"}, `-x\x1b[2J`},
		{"example flag", []string{"example", "--\x1b]0;t\x07"}, `\x1b]0;t\a`},
		{"no terminal", []string{"./" + hostileFile}, "stackfit report ./" + hostileVisible},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out, errs, _ := run(t, "", tc.args...)
			safeOutput(t, "standard output", out)
			safeOutput(t, "standard error", errs)
			if !strings.Contains(out+errs, tc.want) {
				t.Errorf("no %q in\n%s%s", tc.want, out, errs)
			}
		})
	}
}
