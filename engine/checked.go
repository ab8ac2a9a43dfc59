package engine

import (
	"math"
	"math/bits"
)

// mul returns a·b for non-negative a and b, setting *ov when the product
// does not fit in int64 (the result is then meaningless and callers report
// an overflow instead of using it). Negative inputs also set *ov.
func mul(ov *bool, a, b int64) int64 {
	if a < 0 || b < 0 {
		*ov = true
		return 0
	}
	hi, lo := bits.Mul64(uint64(a), uint64(b))
	if hi != 0 || lo > math.MaxInt64 {
		*ov = true
		return 0
	}
	return int64(lo)
}

// add returns a+b for non-negative a and b, setting *ov on overflow.
func add(ov *bool, a, b int64) int64 {
	s := a + b
	if a < 0 || b < 0 || s < 0 {
		*ov = true
		return 0
	}
	return s
}
