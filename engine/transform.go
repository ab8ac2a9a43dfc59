package engine

import (
	"errors"
	"fmt"
	"math"
)

// ErrTransform is wrapped by every error a transform returns.
var ErrTransform = errors.New("cannot apply transform")

// ScaleChannels multiplies a channel count by factor and rounds it to a
// multiple of m, never below m and never more than 10% below the exact
// product (the rounding rule published with MobileNetV2's code; common
// practice since).
func ScaleChannels(c int64, factor float64, m int64) int64 {
	v := float64(c) * factor
	n := int64(math.Round(v/float64(m))) * m
	if n < m {
		n = m
	}
	if float64(n) < 0.9*v {
		n += m
	}
	return n
}

func gcd(a, b int64) int64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

// ScaleWidth returns a copy of s with every layer's width multiplied by
// factor: the width multiplier of Howard et al. 2017 (MobileNets). Filter
// and unit counts are rounded with ScaleChannels to a multiple of m (8 when
// m is 0), and to a multiple of the layer's groups as well. The last layer
// with weights keeps its width, since the task fixes it (classes, output
// channels). A dense layer that feeds a reshape is resized to the reshape's
// scaled element count.
func ScaleWidth(s *Stack, factor float64, m int64) (*Stack, error) {
	if !(factor > 0) || math.IsInf(factor, 0) {
		return nil, fmt.Errorf("%w: width factor %v must be a positive number, e.g. 0.5 or 1.25", ErrTransform, factor)
	}
	if m == 0 {
		m = 8
	}
	if m < 1 || m > 1<<16 {
		return nil, fmt.Errorf("%w: rounding multiple %d must be between 1 and 65536", ErrTransform, m)
	}
	out := s.Clone()
	last := -1
	for i := range out.Layers {
		if out.Layers[i].Kind.HasWeights() {
			last = i
		}
	}
	for i := range out.Layers {
		l := &out.Layers[i]
		if !l.Kind.HasWeights() || i == last || l.Filters < 1 {
			continue
		}
		step := m
		if l.Groups > 1 {
			step = m / gcd(m, l.Groups) * l.Groups
		}
		if l.Kind == KindDense && i+1 < len(out.Layers) && out.Layers[i+1].Kind == KindReshape {
			r := &out.Layers[i+1]
			r.Target.C = ScaleChannels(r.Target.C, factor, m)
			n, ov := r.Target.Elements()
			if ov || n > 1<<40 {
				return nil, fmt.Errorf("%w: layer %d would need %v units", ErrTransform, i+1, r.Target)
			}
			l.Filters = n
			continue
		}
		l.Filters = ScaleChannels(l.Filters, factor, step)
		if l.Filters > 1<<24 {
			return nil, fmt.Errorf("%w: layer %d would have %d channels; use a smaller factor", ErrTransform, i+1, l.Filters)
		}
	}
	return out, nil
}

// StageOptions shapes the stage InsertStage adds.
type StageOptions struct {
	Cap    int64   // most channels the stage may reach; 0 means no cap
	Repeat int     // layers (conv, norm, act) at the new resolution after the downsampling one
	Kernel int64   // kernel size; 0 means 3
	NoNorm bool    // leave out the batch norm after each convolution
	Act    ActKind // activation after each convolution (default ReLU)
}

// InsertStage returns a copy of s with a downsampling stage inserted after
// layer index after (−1 inserts at the start): a stride-2 convolution that
// halves the resolution and doubles the channels (up to opt.Cap, never
// fewer than it had), then opt.Repeat convolutions at the new resolution,
// each followed by batch norm (unless opt.NoNorm) and the activation.
// It also returns how many layers were inserted.
func InsertStage(s *Stack, after int, opt StageOptions) (*Stack, int, error) {
	if after < -1 || after >= len(s.Layers) {
		return nil, 0, fmt.Errorf("%w: no layer %d to insert after (the stack has %d)", ErrTransform, after+1, len(s.Layers))
	}
	if opt.Repeat < 0 || opt.Repeat > 64 {
		return nil, 0, fmt.Errorf("%w: stage repeat %d must be between 0 and 64", ErrTransform, opt.Repeat)
	}
	if opt.Cap < 0 {
		return nil, 0, fmt.Errorf("%w: channel cap %d must not be negative", ErrTransform, opt.Cap)
	}
	k := opt.Kernel
	if k == 0 {
		k = 3
	}
	if k < 1 || k > maxStageKernel {
		return nil, 0, fmt.Errorf("%w: kernel %d must be between 1 and %d", ErrTransform, k, maxStageKernel)
	}
	in := s.Input
	if after >= 0 {
		prefix := &Stack{Input: s.Input, Layers: s.Layers[:after+1]}
		r := Evaluate(prefix)
		if r.Errors > 0 {
			return nil, 0, fmt.Errorf("%w: layer %d has no known output (fix the errors above it first)", ErrTransform, after+1)
		}
		in = r.Output
	}
	if in.C < 1 {
		return nil, 0, fmt.Errorf("%w: the input has no channels", ErrTransform)
	}
	c := 2 * in.C
	if opt.Cap > 0 {
		c = max(in.C, min(c, opt.Cap))
	}
	pad := Padding{Size: Square(k / 2)}
	var add []Layer
	for i := 0; i <= opt.Repeat; i++ {
		l := Layer{Kind: KindConv, Filters: c, Kernel: Square(k), Pad: pad, NoBias: !opt.NoNorm}
		if i == 0 {
			l.Stride = Square(2)
		}
		add = append(add, l)
		if !opt.NoNorm {
			add = append(add, Layer{Kind: KindNorm, Norm: NormBatch})
		}
		add = append(add, Layer{Kind: KindAct, Act: opt.Act})
	}
	out := s.Clone()
	out.Layers = append(out.Layers[:after+1:after+1], append(add, s.Layers[after+1:]...)...)
	return out, len(add), nil
}

const maxStageKernel = 15
