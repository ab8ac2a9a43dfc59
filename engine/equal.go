package engine

import (
	"math"
	"slices"
)

// Equal reports whether two layers are the same in every field, their
// bodies included, item by item. Floating-point fields compare by their
// bits, so 0 and −0 differ and a NaN equals itself: two equal layers are
// interchangeable in every output, the stack file included.
func (l *Layer) Equal(o *Layer) bool {
	return l.EqualFields(o) && EqualLayers(l.Body, o.Body)
}

// EqualLayers reports whether two lists hold equal layers in the same
// order. A nil list and an empty one are different (a block written with
// no layers is not one whose body was never set).
func EqualLayers(a, b []Layer) bool {
	if len(a) != len(b) || (a == nil) != (b == nil) {
		return false
	}
	for i := range a {
		if !a[i].Equal(&b[i]) {
			return false
		}
	}
	return true
}

// EqualFields reports whether two layers agree in every field but Body.
// TestEqualFieldsSeesEveryField fails when a field is added to Layer and
// not here.
func (l *Layer) EqualFields(o *Layer) bool {
	same := func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }
	return l.Kind == o.Kind && l.Filters == o.Filters && l.Kernel == o.Kernel && l.Stride == o.Stride &&
		l.Pad == o.Pad && l.Dilation == o.Dilation && l.Groups == o.Groups && l.Depthwise == o.Depthwise &&
		l.Rel.Div == o.Rel.Div && same(l.Rel.Mul, o.Rel.Mul) && l.NoBias == o.NoBias && l.BiasOn == o.BiasOn &&
		l.GroupWidth == o.GroupWidth && l.OutPad == o.OutPad &&
		l.Pool == o.Pool && l.Ceil == o.Ceil && l.Size == o.Size && l.Factor == o.Factor && l.Upsample == o.Upsample &&
		l.Norm == o.Norm && l.NormGroups == o.NormGroups && l.Affine == o.Affine && same(l.Eps, o.Eps) &&
		l.PerPosition == o.PerPosition && l.Act == o.Act && same(l.Slope, o.Slope) && l.PerChannel == o.PerChannel && same(l.Rate, o.Rate) &&
		l.Target == o.Target && l.Repeat == o.Repeat && l.AllStrides == o.AllStrides && l.Residual == o.Residual &&
		l.NoShortcutNorm == o.NoShortcutNorm && l.PostAct == o.PostAct && l.HasPostAct == o.HasPostAct &&
		l.IdentityOnly == o.IdentityOnly && same(l.DropPath, o.DropPath) && l.DenseLinks == o.DenseLinks &&
		l.Split == o.Split && l.JoinAdd == o.JoinAdd && l.From == o.From && l.Crop == o.Crop && l.First == o.First && l.RelBlock == o.RelBlock &&
		l.RelInput == o.RelInput && l.RoundTo == o.RoundTo && same(l.ScaleInit, o.ScaleInit) && l.PixelFactor == o.PixelFactor && l.Keep == o.Keep && l.GateNorm == o.GateNorm && l.Name == o.Name && l.Note == o.Note &&
		l.Unit == o.Unit && slices.Equal(l.Args, o.Args) && slices.Equal(l.Binds, o.Binds)
}
