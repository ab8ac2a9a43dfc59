package onnximport

import (
	"bytes"
	"errors"
	"fmt"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// verify holds the stack to the graph it was read from: it must evaluate
// without an error, and its parameters and buffers must be the graph's
// (the weights every layer read), so that an import never gives a
// silently wrong count.
func (b *builder) verify(s *engine.Stack) error {
	r := engine.Evaluate(s)
	if r.Errors > 0 {
		for _, d := range r.Diags {
			if d.Severity == engine.SevError {
				return fmt.Errorf("%w: the stack read from the graph does not evaluate (row %d: %s)", ErrImport, d.Row+1, d.Message())
			}
		}
	}
	if r.Totals.Params != b.params {
		return fmt.Errorf("%w: the stack read from the graph has %d parameters where the graph's weights hold %d; the graph uses a pattern the import misreads", ErrImport, r.Totals.Params, b.params)
	}
	if r.Totals.Buffers != b.buffers {
		return fmt.Errorf("%w: the stack read from the graph has %d buffer values where the graph holds %d; the graph uses a pattern the import misreads", ErrImport, r.Totals.Buffers, b.buffers)
	}
	return nil
}

// writable holds the stack to what a stack file may hold: it is saved
// and loaded back through the stack-file loader, which checks every field
// against its limits, and must save again to the same text. An import never gives a
// stack that stackfit would then refuse to read.
func writable(s *engine.Stack) error {
	data, err := stackfile.Save(s)
	if err != nil {
		return fmt.Errorf("%w: the stack read from the graph cannot be written as a stack file: %v", ErrImport, err)
	}
	back, err := stackfile.Load(data)
	if err != nil {
		msg := err.Error()
		var list stackfile.ErrorList
		if errors.As(err, &list) && len(list) > 0 {
			msg = list[0].Msg
			if list[0].Field != "" {
				msg = list[0].Field + ": " + msg
			}
		}
		return fmt.Errorf("%w: a value in the graph is past what a stack file holds: %s", ErrImport, msg)
	}
	if again, err := stackfile.Save(back); err != nil || !bytes.Equal(again, data) {
		return fmt.Errorf("%w: the stack read from the graph does not read back the same from its stack file", ErrImport)
	}
	return nil
}
