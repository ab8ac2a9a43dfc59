package onnximport

import (
	"fmt"

	"stackfit/engine"
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
				return fmt.Errorf("%w: the stack read from the graph does not evaluate (row %d: %s); the graph uses a pattern the import misreads", ErrImport, d.Row+1, d.Message())
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
