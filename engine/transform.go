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

// widthStep is the multiple a layer's scaled width is rounded to: m, and
// a multiple of the layer's groups as well.
func widthStep(l *Layer, m int64) int64 {
	if l.Groups > 1 {
		return m / gcd(m, l.Groups) * l.Groups
	}
	return m
}

// ScaleWidth returns a copy of s with every layer's width multiplied by
// factor: the width multiplier of Howard et al. 2017 (MobileNets). Filter
// and unit counts are rounded with ScaleChannels to a multiple of m (8 when
// m is 0), and to a multiple of the layer's groups as well. The last layer
// with weights keeps its width, since the task fixes it (classes, output
// channels). A dense layer that feeds a reshape is resized to the reshape's
// scaled element count. A stack written with units keeps them, the
// scaling carried into their widths and the uses' arguments, when they
// can carry it exactly; otherwise it is returned written out, without
// units (see carryWidths).
func ScaleWidth(s *Stack, factor float64, m int64) (*Stack, error) {
	return scaleWidth(s, factor, m, true)
}

// scaleWidth is ScaleWidth; without carry, the units are left as they
// were and only the uses' expansions scaled: what Evaluate reads, for the
// searches and sweeps that evaluate a variant and never write it.
func scaleWidth(s *Stack, factor float64, m int64, carry bool) (*Stack, error) {
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
	// The last weighted layer (in stack order, inside blocks too) gives
	// the output's channels or classes: it keeps its width.
	var last *Layer
	var find func(ls []Layer)
	find = func(ls []Layer) {
		for i := range ls {
			if ls[i].Kind.HasWeights() {
				last = &ls[i]
			}
			find(ls[i].Body)
		}
	}
	find(out.Layers)
	var err error
	var scale func(ls []Layer, where Path)
	scale = func(ls []Layer, where Path) {
		for i := range ls {
			l := &ls[i]
			at := where.Append(i + 1)
			if err != nil {
				return
			}
			scale(l.Body, at) // blocks, gates, forks and branches: their layers too
			if !l.Kind.HasWeights() || l == last || l.Filters < 1 || !l.Rel.IsZero() {
				continue // a relative width follows its input
			}
			step := widthStep(l, m)
			if l.Kind == KindDense && i+1 < len(ls) && ls[i+1].Kind == KindReshape {
				r := &ls[i+1]
				r.Target.C = ScaleChannels(r.Target.C, factor, m)
				n, ov := r.Target.Elements()
				if ov || n > 1<<40 {
					err = fmt.Errorf("%w: layer %s would need %v units", ErrTransform, at, r.Target)
					return
				}
				l.Filters = n
				continue
			}
			l.Filters = ScaleChannels(l.Filters, factor, step)
			if l.Filters > 1<<24 {
				err = fmt.Errorf("%w: layer %s would have %d channels; use a smaller factor", ErrTransform, at, l.Filters)
				return
			}
		}
	}
	scale(out.Layers, Path{})
	if err != nil {
		return nil, err
	}
	if carry && len(out.Units) > 0 {
		out = carryWidths(out, factor, m)
	}
	return out, nil
}

// StageOptions shapes the stage InsertStage adds: how far its channels
// may grow, how many layers it has at the new size, and the template each
// repeat follows (a convolution, a norm and an activation). The zero value
// is the fallback template: a 3×3 convolution without bias, batch norm and
// ReLU, with no cap. StageTemplate builds the options from a stack.
type StageOptions struct {
	Cap    int64    // most channels the stage may reach; 0 means no cap
	Repeat int      // repeats of the template at the new resolution after the downsampling one
	Kernel int64    // the convolutions' kernel (odd); 0 means 3
	Bias   Toggle   // the convolutions' bias; Unset: a bias only where no norm follows
	NoNorm bool     // no norm after each convolution
	Norm   NormKind // the norm after each convolution (batch by default)
	Groups int64    // group norm's groups; 0 means DefaultStageGroups
	NoAct  bool     // no activation after each norm
	Act    ActKind  // the activation (ReLU by default)
	Slope  float64  // leaky-relu's negative slope; 0 means its default, 0.01
	// PerChannel: a prelu activation learns one slope per channel (copied
	// from the stack's; the stage settings name no field for it).
	PerChannel bool
	Up         UpMode // how an up-stage (InsertUpStage) doubles the size
}

// InsertStage returns a copy of s with a downsampling stage inserted after
// top-level item after (−1 inserts at the start), as one block item: its
// layers — a convolution (stride 2 and padding k/2, its filters double the
// input's channels, up to opt.Cap but never fewer than the input has), the
// norm and the activation of opt — run opt.Repeat + 1 times. A block's
// later repeats run with stride 1 (strides: first), so the first repeat
// halves the resolution and the others keep it: the same rows as the
// convolution, norm and activation written out Repeat + 1 times. The block
// is named DownStagePrefix and the first free number ("down1", "down2"),
// so a later up-stage can join it (InsertUpStage). It also returns how
// many items it inserted (1: the block, at index after + 1).
func InsertStage(s *Stack, after int, opt StageOptions) (*Stack, int, error) {
	k, in, err := stageInput(s, after, opt)
	if err != nil {
		return nil, 0, err
	}
	c := 2 * in.C
	if opt.Cap > 0 {
		c = max(in.C, min(c, opt.Cap))
	}
	conv := Layer{Kind: KindConv, Filters: c, Kernel: Square(k), Stride: Square(2), Pad: Padding{Size: Square(k / 2)},
		NoBias: !opt.Bias.Or(opt.NoNorm)}
	body, err := stageBody(conv, opt)
	if err != nil {
		return nil, 0, err
	}
	block := Layer{Kind: KindBlock, Name: FreeName(s, DownStagePrefix), Repeat: int64(opt.Repeat) + 1, Body: body}
	out := s.Clone()
	out.Layers = append(out.Layers[:after+1:after+1], append([]Layer{block}, s.Layers[after+1:]...)...)
	return out, 1, nil
}

// stageBody returns conv followed by the norm and the activation of opt:
// one repeat of a stage.
func stageBody(conv Layer, opt StageOptions) ([]Layer, error) {
	body := []Layer{conv}
	c := conv.Filters
	if !opt.NoNorm {
		norm := Layer{Kind: KindNorm, Norm: opt.Norm}
		if opt.Norm == NormGroup {
			norm.NormGroups = opt.Groups
			if norm.NormGroups == 0 {
				norm.NormGroups = DefaultStageGroups
			}
			if c%norm.NormGroups != 0 {
				return nil, fmt.Errorf("%w: group norm's %d groups do not divide the stage's %d channels; set the stage's groups to a divisor of %d", ErrTransform, norm.NormGroups, c, c)
			}
		}
		body = append(body, norm)
	}
	if !opt.NoAct {
		act := Layer{Kind: KindAct, Act: opt.Act}
		if opt.Act == ActLeakyReLU {
			act.Slope = opt.Slope
		}
		act.PerChannel = opt.Act == ActPReLU && opt.PerChannel
		body = append(body, act)
	}
	return body, nil
}

// stageInput checks a stage's options and its place (after a top-level
// item, −1: at the start) and returns its kernel and the shape it reads.
func stageInput(s *Stack, after int, opt StageOptions) (int64, Shape, error) {
	if after < -1 || after >= len(s.Layers) {
		return 0, Shape{}, fmt.Errorf("%w: no layer %d to insert after (the stack has %d)", ErrTransform, after+1, len(s.Layers))
	}
	if opt.Repeat < 0 || opt.Repeat > MaxStageLayers {
		return 0, Shape{}, fmt.Errorf("%w: stage repeat %d must be between 0 and %d", ErrTransform, opt.Repeat, MaxStageLayers)
	}
	if opt.Cap < 0 {
		return 0, Shape{}, fmt.Errorf("%w: channel cap %d must not be negative", ErrTransform, opt.Cap)
	}
	k := opt.Kernel
	if k == 0 {
		k = DefaultStageKernel
	}
	if k < 1 || k > MaxStageKernel || k%2 == 0 {
		return 0, Shape{}, fmt.Errorf("%w: kernel %d must be odd, from 1 to %d (the padding k/2 then keeps the size)", ErrTransform, k, MaxStageKernel)
	}
	if int(opt.Norm) >= len(normNames) || int(opt.Act) >= len(activations) || opt.Groups < 0 || !(opt.Slope >= 0 && opt.Slope < maxStageSlope) {
		return 0, Shape{}, fmt.Errorf("%w: the stage template is not valid (norm %d, groups %d, activation %d, slope %g)", ErrTransform, opt.Norm, opt.Groups, opt.Act, opt.Slope)
	}
	in := s.Input
	if after >= 0 {
		prefix := &Stack{Input: s.Input, Layers: s.Layers[:after+1]}
		r := Evaluate(prefix)
		if r.Errors > 0 {
			return 0, Shape{}, fmt.Errorf("%w: layer %d has no known output (fix the errors above it first)", ErrTransform, after+1)
		}
		in = r.Output
	}
	if in.C < 1 {
		return 0, Shape{}, fmt.Errorf("%w: the input has no channels", ErrTransform)
	}
	return k, in, nil
}
