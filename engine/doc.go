// Package engine is stackfit's sizing engine: given an input tensor shape and
// a stack of layers it computes, for every layer, the output shape, trainable
// parameters, non-trainable buffers, multiply-accumulates, receptive field and
// effective stride, together with diagnostics that name the layer and the
// numbers involved.
//
// The package is pure: it does no I/O, keeps no global state and never
// panics on user input. Every product of user-supplied numbers is
// overflow-checked; a result past int64 becomes an error diagnostic rather
// than a wrapped number.
//
// Counting conventions (the ones published model tables use):
//   - MACs count one multiply-accumulate per use of a convolution or dense
//     weight; bias, normalisation, activation, pooling and residual additions
//     count zero.
//   - Parameters are trainable tensors only; running statistics and other
//     state are buffers.
package engine
