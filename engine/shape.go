package engine

import "fmt"

// Shape is the per-sample shape of a feature map: channels × height × width.
// A flat feature vector of n values is Shape{C: n, H: 1, W: 1}.
type Shape struct {
	C, H, W int64
}

// Elements returns C·H·W and whether the product overflowed int64.
func (s Shape) Elements() (int64, bool) {
	var ov bool
	n := mul(&ov, mul(&ov, s.C, s.H), s.W)
	return n, ov
}

// Spatial reports whether the shape has more than one position.
func (s Shape) Spatial() bool { return s.H > 1 || s.W > 1 }

// Valid reports whether every dimension is positive.
func (s Shape) Valid() bool { return s.C > 0 && s.H > 0 && s.W > 0 }

// String formats the shape as C×H×W.
func (s Shape) String() string { return fmt.Sprintf("%d×%d×%d", s.C, s.H, s.W) }

// Pair holds one value per spatial axis: height first, then width.
type Pair struct {
	H, W int64
}

// Square returns a Pair with the same value on both axes.
func Square(n int64) Pair { return Pair{n, n} }

// IsZero reports whether both values are zero (field not set).
func (p Pair) IsZero() bool { return p.H == 0 && p.W == 0 }

// Or returns p, or d when p is unset.
func (p Pair) Or(d Pair) Pair {
	if p.IsZero() {
		return d
	}
	return p
}

// String formats the pair as "n" when square and "h×w" otherwise.
func (p Pair) String() string {
	if p.H == p.W {
		return fmt.Sprint(p.H)
	}
	return fmt.Sprintf("%d×%d", p.H, p.W)
}
