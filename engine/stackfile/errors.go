// Package stackfile reads and writes stackfit's YAML stack files.
//
// Loading walks the YAML node tree itself, so every problem is reported with
// its line and column, the field at fault and what the field accepts.
// Saving writes one canonical form: loading a saved file and saving it again
// gives the same bytes.
//
// The package works on bytes in memory and touches no file: reading a stack
// file by path, atomic saves and the recovery journal are in ui/store.
package stackfile

import (
	"errors"
	"fmt"
	"strings"
)

// Sentinel errors; every *Error wraps one of them.
var (
	ErrSyntax   = errors.New("not valid YAML")
	ErrUnknown  = errors.New("unknown key")
	ErrType     = errors.New("wrong type")
	ErrRange    = errors.New("value out of range")
	ErrMissing  = errors.New("missing field")
	ErrVersion  = errors.New("unsupported format version")
	ErrTooLarge = errors.New("file too large")
	ErrAlias    = errors.New("YAML anchors and aliases are not allowed")
	ErrNesting  = errors.New("nesting too deep")
	ErrName     = errors.New("bad layer name")
)

// Error is one problem in a stack file, located by line and column.
type Error struct {
	File      string // file name, when loaded from a file
	Line, Col int    // 1-based position; 0 when unknown
	Field     string // where in the stack, e.g. "layer 3 (conv) → kernel"
	Msg       string // what is wrong and what is allowed
	Err       error  // one of the sentinels above
}

// Error formats the problem as file:line:col: field: message.
func (e *Error) Error() string {
	var b strings.Builder
	if e.File != "" {
		b.WriteString(e.File)
		b.WriteByte(':')
	}
	if e.Line > 0 {
		fmt.Fprintf(&b, "%d:%d:", e.Line, e.Col)
	}
	if b.Len() > 0 {
		b.WriteByte(' ')
	}
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// Unwrap returns the sentinel.
func (e *Error) Unwrap() error { return e.Err }

// ErrorList is every problem found in one file, in file order.
type ErrorList []*Error

// Error joins the problems, one per line.
func (l ErrorList) Error() string {
	parts := make([]string, len(l))
	for i, e := range l {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "\n")
}

// Unwrap returns the individual errors, for errors.Is and errors.As.
func (l ErrorList) Unwrap() []error {
	out := make([]error, len(l))
	for i, e := range l {
		out[i] = e
	}
	return out
}

// Suggest returns the candidate closest to s by edit distance when it is
// close enough to be a likely typo (one edit per four letters, at least
// one), or "".
func Suggest(s string, candidates []string) string {
	best, bestD := "", 2+len(s)/4
	for _, c := range candidates {
		if d := editDistance(strings.ToLower(s), c); d < bestD {
			best, bestD = c, d
		}
	}
	return best
}

// editDistance is the optimal-string-alignment distance between a and b:
// insertions, deletions, substitutions and swaps of neighbours cost one.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	if len(ra) > 64 { // no kind, key or command is that long
		return len(ra)
	}
	d := make([][]int, len(ra)+1)
	for i := range d {
		d[i] = make([]int, len(rb)+1)
		d[i][0] = i
	}
	for j := range d[0] {
		d[0][j] = j
	}
	for i := 1; i <= len(ra); i++ {
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			d[i][j] = min(d[i-1][j]+1, d[i][j-1]+1, d[i-1][j-1]+cost)
			if i > 1 && j > 1 && ra[i-1] == rb[j-2] && ra[i-2] == rb[j-1] {
				d[i][j] = min(d[i][j], d[i-2][j-2]+1)
			}
		}
	}
	return d[len(ra)][len(rb)]
}
