package stackfile

import (
	"errors"
	"strings"
	"testing"
	"time"
)

// aliasBomb is the "billion laughs" pattern: nine levels of nine aliases.
func aliasBomb() string {
	var b strings.Builder
	b.WriteString("a0: &a0 [\"lol\"]\n")
	for i := 1; i <= 9; i++ {
		b.WriteString("a" + string(rune('0'+i)) + ": &a" + string(rune('0'+i)) + " [")
		for j := 0; j < 9; j++ {
			if j > 0 {
				b.WriteString(",")
			}
			b.WriteString("*a" + string(rune('0'+i-1)))
		}
		b.WriteString("]\n")
	}
	return b.String()
}

// nested returns a block nested n deep around one layer.
func nested(n int) string {
	var b strings.Builder
	b.WriteString("stackfit: 1\ninput: [3, 8, 8]\nlayers:\n")
	ind := "  "
	for i := 0; i < n; i++ {
		b.WriteString(ind + "- block: 1\n" + ind + "  layers:\n")
		ind += "    "
	}
	b.WriteString(ind + "- {act: relu}\n")
	return b.String()
}

// TestHostileInput lists hostile and broken files with the exact first
// message each must produce.
func TestHostileInput(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 32, 32]\nlayers:\n"
	tests := []struct {
		name     string
		src      string
		sentinel error
		want     string
	}{
		{"alias bomb", aliasBomb(), ErrAlias,
			`1:5: file: anchors (&) and aliases (*) are not allowed in stack files; write the value out`},
		{"file over 8 MiB", head + strings.Repeat("  - {act: relu}\n", 600000), ErrTooLarge,
			`the file is 9600039 bytes; stack files are limited to 8388608 bytes (8 MiB)`},
		{"blocks nested past the limit", nested(4), ErrNesting,
			`11:17: layer 1 → 1 → 1 → 1 (block): blocks nest 4 deep here; the limit is 3 — flatten an inner block`},
		{"YAML nested past the parser's limit", "name: " + strings.Repeat("[", 20000) + strings.Repeat("]", 20000) + "\n", ErrSyntax,
			`not valid YAML: exceeded max depth of 10000 (check indentation, colons, quotes and brackets from this line on)`},
		{"binary junk", "\x7fELF\x02\x01\x01\x00\x00\x00", ErrSyntax,
			`the file holds binary data (a NUL byte); a stack file is YAML text`},
		{"not a mapping", "- just\n- a list\n", ErrType,
			`1:1: file: expected a stack (stackfit:, name:, input:, layers:) (key: value lines), found a list`},
		{"wrong type: text for a number", head + "  - {dense: ten}\n", ErrType,
			`4:13: layer 1 (dense) → dense (units): expected a whole number, found the text "ten"`},
		{"wrong type: list for a kernel", head + "  - {conv: 8, kernel: [1, 2, 3]}\n", ErrType,
			`4:23: layer 1 (conv) → kernel: expected one number or [height, width], found a list of 3`},
		{"number past int64", "stackfit: 1\ninput: [3, 99999999999999999999, 32]\nlayers: []\n", ErrRange,
			`2:12: input height: 99999999999999999999 is too large; it must be at most 1048576`},
		{"zero size", "stackfit: 1\ninput: [3, 0, 32]\nlayers: []\n", ErrRange,
			`2:12: input height: 0 is out of range; it must be between 1 and 1048576`},
		{"negative size", head + "  - {pool: max, kernel: -2}\n", ErrRange,
			`4:25: layer 1 (pool) → kernel: -2 is out of range; it must be between 1 and 65536`},
		{"unknown kind", head + "  - {convolution: 8, kernel: 3}\n", ErrUnknown,
			`4:5: layer 1: no layer kind found; start the item with one of: conv, deconv, pool, global-pool, pool-to, upsample, norm, act, dropout, flatten, dense, reshape, block, concat, add, gate, scale, shuffle, fork, branch, to-space, to-channels, keep, spatial-gate`},
		{"duplicate names", head + "  - {conv: 8, kernel: 3, name: x}\n  - block: 1\n    name: x\n    layers: [{act: relu}]\n", ErrName,
			`6:11: layer 2 (block) → name: "x" is already used on line 4; names must be unique`},
		{"empty file", "", ErrMissing,
			`the file is empty; a stack file needs at least input: and layers:`},
		{"only comments", "# nothing here\n", ErrMissing,
			`the file is empty; a stack file needs at least input: and layers:`},
		{"repeat past the limit", head + "  - block: 5000\n    layers: [{act: relu}]\n", ErrRange,
			`4:12: layer 1 (block) → block (repeats): 5000 is out of range; it must be between 1 and 1024`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			start := time.Now()
			_, err := Load([]byte(tt.src))
			if d := time.Since(start); d > time.Second {
				t.Errorf("took %v; hostile input must be refused in under a second", d)
			}
			if err == nil || !errors.Is(err, tt.sentinel) {
				t.Fatalf("error %v does not wrap %v", err, tt.sentinel)
			}
			var list ErrorList
			errors.As(err, &list)
			if got := list[0].Error(); got != tt.want {
				t.Errorf("got  %s\nwant %s", got, tt.want)
			}
		})
	}
	// An empty layer list is a valid (empty) stack.
	s, err := Load([]byte("stackfit: 1\ninput: [3, 8, 8]\nlayers: []\n"))
	if err != nil || len(s.Layers) != 0 {
		t.Errorf("empty stack: %v", err)
	}
}
