package engine

import (
	"context"
	"fmt"
	"math"
)

// Scaling describes a scaled variant of a stack along the three
// dimensions of model scaling (Tan & Le 2019, "EfficientNet: Rethinking
// Model Scaling for Convolutional Neural Networks", section 3): width,
// depth and input resolution. A zero field leaves its dimension as it is.
type Scaling struct {
	// Width multiplies every absolute width (filters, units) with
	// torchvision's rounding (ScaleWidth); relative widths follow their
	// inputs and the last weighted layer keeps the task's width. 1, like
	// 0, leaves every width as written (no rounding either).
	Width float64
	// Depth multiplies each block's repeats: N becomes ⌈N·Depth⌉.
	Depth float64
	// Resolution multiplies the input's height and width, each rounded to
	// the nearest whole number (halves away from zero). Size, when set,
	// is used instead.
	Resolution float64
	// Size sets the input's height and width.
	Size Pair
	// Divisor is the multiple widths are rounded to; 0 means 8.
	Divisor int64
}

// IsZero reports whether the scaling changes nothing.
func (sc Scaling) IsZero() bool {
	return sc.Width == 0 && sc.Depth == 0 && sc.Resolution == 0 && sc.Size == (Pair{})
}

// Scale returns a copy of s scaled by sc: the width first (ScaleWidth),
// then the depth (ScaleDepth), then the input (ScaleInput or
// ScaleResolution). s is not changed.
func Scale(s *Stack, sc Scaling) (*Stack, error) {
	return scale(s, sc, true)
}

// ScaleRows is Scale for a variant that is evaluated, never written: a
// stack's units are left as they were and only their uses' expansions
// scaled, which is what Evaluate reads (and cheaper: see ScaleWidth).
func ScaleRows(s *Stack, sc Scaling) (*Stack, error) {
	return scale(s, sc, false)
}

func scale(s *Stack, sc Scaling, carry bool) (*Stack, error) {
	out := s.Clone()
	var err error
	if sc.Width != 0 && sc.Width != 1 {
		if out, err = scaleWidth(out, sc.Width, sc.Divisor, carry); err != nil {
			return nil, err
		}
	}
	if sc.Depth != 0 {
		if out, err = ScaleDepth(out, sc.Depth); err != nil {
			return nil, err
		}
	}
	switch {
	case sc.Size != (Pair{}):
		out, err = ScaleInput(out, sc.Size)
	case sc.Resolution != 0:
		out, err = ScaleResolution(out, sc.Resolution)
	}
	if err != nil {
		return nil, err
	}
	return out, nil
}

// DepthRepeats is the repeats a block of n repeats has at depth
// multiplier d: ⌈n·d⌉, at least 1, computed in float64 as torchvision's
// EfficientNet computes each stage's layers (math.ceil(num_layers *
// depth_mult) in torchvision/models/efficientnet.py).
func DepthRepeats(n int64, d float64) int64 {
	v := math.Ceil(float64(max(n, 1)) * d)
	if v < 1 {
		return 1
	}
	if v > MaxRepeat*2 {
		return MaxRepeat * 2
	}
	return int64(v)
}

// ScaleDepth returns a copy of s with each block's repeats multiplied by
// d and rounded up (DepthRepeats): how EfficientNet deepens its stages. A
// block inside another block (its body repeats with it) keeps its
// repeats, so the depth of a stage grows once, not once per level.
func ScaleDepth(s *Stack, d float64) (*Stack, error) {
	if !(d > 0) || math.IsInf(d, 0) {
		return nil, fmt.Errorf("%w: depth factor %v must be a positive number, e.g. 1.2 or 0.5", ErrTransform, d)
	}
	out := s.Clone()
	var err error
	var walk func(ls []Layer, where Path)
	walk = func(ls []Layer, where Path) {
		for i := range ls {
			l := &ls[i]
			at := where.Append(i + 1)
			if err != nil {
				return
			}
			if l.Kind != KindBlock {
				walk(l.Body, at) // gates, forks, branches: a block inside is a stage too
				continue
			}
			n := DepthRepeats(l.Repeat, d)
			if n > MaxRepeat {
				err = fmt.Errorf("%w: block %s would repeat %d times, more than %d; use a smaller depth factor", ErrTransform, at, n, MaxRepeat)
				return
			}
			l.Repeat = n
		}
	}
	walk(out.Layers, Path{})
	if err != nil {
		return nil, err
	}
	return out, nil
}

// ScaleInput returns a copy of s whose input has the height and width of
// size (the channels stay).
func ScaleInput(s *Stack, size Pair) (*Stack, error) {
	if size.H < 1 || size.W < 1 || size.H > MaxSpatial || size.W > MaxSpatial {
		return nil, fmt.Errorf("%w: input size %d×%d must be from 1 to %d on each side, e.g. 240×240", ErrTransform, size.H, size.W, MaxSpatial)
	}
	if !s.Input.Spatial() && (size.H > 1 || size.W > 1) {
		return nil, fmt.Errorf("%w: the input %v has no height and width to scale; give the stack file an input such as [3, 224, 224]", ErrTransform, s.Input)
	}
	out := s.Clone()
	out.Input.H, out.Input.W = size.H, size.W
	return out, nil
}

// ResolutionSize is the input size at resolution multiplier r: each side
// times r, rounded to the nearest whole number (halves away from zero),
// at least 1.
func ResolutionSize(in Shape, r float64) Pair {
	side := func(n int64) int64 {
		v := math.Round(float64(n) * r)
		if v < 1 {
			return 1
		}
		if v > MaxSpatial*2 {
			return MaxSpatial * 2
		}
		return int64(v)
	}
	return Pair{side(in.H), side(in.W)}
}

// ScaleResolution returns a copy of s with the input's height and width
// multiplied by r (ResolutionSize).
func ScaleResolution(s *Stack, r float64) (*Stack, error) {
	if !(r > 0) || math.IsInf(r, 0) {
		return nil, fmt.Errorf("%w: resolution factor %v must be a positive number, e.g. 1.15", ErrTransform, r)
	}
	return ScaleInput(s, ResolutionSize(s.Input, r))
}

// Compound is compound scaling's constants (Tan & Le 2019, equation 3):
// depth α^φ, width β^φ and resolution γ^φ for a compound coefficient φ.
type Compound struct {
	Alpha, Beta, Gamma float64
}

// DefaultCompound is the paper's grid-searched constants for
// EfficientNet-B0: α = 1.2, β = 1.1, γ = 1.15 (Tan & Le 2019, section
// 4.2, step 1).
func DefaultCompound() Compound { return Compound{Alpha: 1.2, Beta: 1.1, Gamma: 1.15} }

// Check reports constants that are not numbers above 0.
func (c Compound) Check() error {
	for _, f := range []struct {
		name string
		v    float64
	}{{"alpha", c.Alpha}, {"beta", c.Beta}, {"gamma", c.Gamma}} {
		if !(f.v > 0) || math.IsInf(f.v, 0) {
			return fmt.Errorf("%w: compound %s %v must be a positive number, e.g. %v", ErrTransform, f.name, f.v,
				map[string]float64{"alpha": 1.2, "beta": 1.1, "gamma": 1.15}[f.name])
		}
	}
	return nil
}

// At returns the scaling at compound coefficient φ: depth α^φ, width β^φ,
// resolution γ^φ.
func (c Compound) At(phi float64) Scaling {
	return Scaling{Depth: math.Pow(c.Alpha, phi), Width: math.Pow(c.Beta, phi), Resolution: math.Pow(c.Gamma, phi)}
}

// Axis is what a scale search varies.
type Axis int

// The axes MaxScale searches.
const (
	AxisCompound   Axis = iota // the compound coefficient φ
	AxisWidth                  // the width multiplier alone
	AxisDepth                  // the depth multiplier alone
	AxisResolution             // the resolution multiplier alone
)

// String names the axis as the command line does.
func (x Axis) String() string {
	return [...]string{"phi", "width", "depth", "resolution"}[x]
}

// ScaleStep is the precision of MaxScale: the answer is a multiple of it.
const ScaleStep = 0.01

// scaleRange is the grid MaxScale searches for each axis, in steps of
// ScaleStep: φ from −8 to 16; the multipliers from 0.01 to 32.
func scaleRange(x Axis) (lo, hi int64) {
	if x == AxisCompound {
		return -800, 1600
	}
	return 1, 3200
}

// ScaleFit is MaxScale's answer.
type ScaleFit struct {
	Axis    Axis
	Value   float64 // the largest φ or multiplier that fits, a multiple of ScaleStep
	Scaling Scaling // the variant at Value
	Fits    bool    // false: not even the smallest value searched fits (Value is meaningless)
	Bounded bool    // false: even the largest value searched fits
	// Limit is the memory category that stands in the way one step past
	// the answer (or at the smallest value, when nothing fits); empty
	// where that step's variant has errors instead (Broken).
	Limit  string
	Broken bool
}

// ScalingFor returns the scaling at value v on axis x (a multiplier, or
// φ for AxisCompound).
func ScalingFor(x Axis, v float64, c Compound) Scaling {
	switch x {
	case AxisWidth:
		return Scaling{Width: v}
	case AxisDepth:
		return Scaling{Depth: v}
	case AxisResolution:
		return Scaling{Resolution: v}
	}
	return c.At(v)
}

// MaxScale finds the largest value on axis x, a multiple of ScaleStep,
// whose variant of s fits t's budget at t's batch under the training-
// memory estimate (Result.Memory). It starts from s itself (φ = 0, or a
// multiplier of 1): when s fits it searches upward, otherwise downward,
// by bisection over the grid, which assumes memory grows with the value
// (it does, but for the rounding of widths and repeats, which can make a
// variant a step below the answer cost a little more). A variant with
// errors (say, an input too small for its strides) counts as not fitting.
// It needs a budget; ctx is checked before every evaluation.
func MaxScale(ctx context.Context, s *Stack, t Training, a Assumptions, x Axis, c Compound) (ScaleFit, error) {
	f := ScaleFit{Axis: x}
	if t.Budget <= 0 {
		return f, fmt.Errorf("%w: the search needs a memory budget per GPU; give one, e.g. 24GiB", ErrTransform)
	}
	if x < AxisCompound || x > AxisResolution {
		return f, fmt.Errorf("%w: unknown scaling axis %d", ErrTransform, int(x))
	}
	if x == AxisCompound {
		if err := c.Check(); err != nil {
			return f, err
		}
	}
	if x == AxisResolution && !s.Input.Spatial() {
		return f, fmt.Errorf("%w: the input %v has no height and width to scale", ErrTransform, s.Input)
	}
	var r Result
	var m Memory
	value := func(k int64) float64 { return float64(k) * ScaleStep }
	// try reports whether the variant at grid point k fits, and what
	// stops it when it does not.
	try := func(k int64) (fits bool, limit string, broken bool, err error) {
		if err := ctx.Err(); err != nil {
			return false, "", false, err
		}
		v, terr := ScaleRows(s, ScalingFor(x, value(k), c))
		if terr != nil {
			return false, "", true, nil
		}
		r.Evaluate(v)
		if r.Errors > 0 {
			return false, "", true, nil
		}
		r.Memory(t, a, &m)
		if !m.Estimated {
			return false, "", true, nil
		}
		return m.Fits, m.Largest(), false, nil
	}
	lo, hi := scaleRange(x)
	start := int64(0) // φ = 0
	if x != AxisCompound {
		start = int64(math.Round(1 / ScaleStep)) // a multiplier of 1
	}
	ok, lim, broken, err := try(start)
	if err != nil {
		return f, err
	}
	if ok {
		lo = start
		ok, _, _, err = try(hi)
		if err != nil {
			return f, err
		}
		if ok {
			f.Value, f.Fits = value(hi), true
			f.Scaling = ScalingFor(x, f.Value, c)
			return f, nil
		}
	} else {
		hi = start
		ok, lim, broken, err = try(lo)
		if err != nil {
			return f, err
		}
		if !ok {
			f.Limit, f.Broken, f.Bounded = lim, broken, true
			return f, nil
		}
	}
	// Invariant: lo fits, hi does not.
	for hi-lo > 1 {
		mid := lo + (hi-lo)/2
		ok, _, _, err := try(mid)
		if err != nil {
			return f, err
		}
		if ok {
			lo = mid
		} else {
			hi = mid
		}
	}
	_, lim, broken, err = try(hi)
	if err != nil {
		return f, err
	}
	f.Value, f.Fits, f.Bounded, f.Limit, f.Broken = value(lo), true, true, lim, broken
	f.Scaling = ScalingFor(x, f.Value, c)
	return f, nil
}
