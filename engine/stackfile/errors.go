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
