package engine

import (
	"strconv"
	"strings"
)

// Summary writes a layer as one short line, e.g. "conv 64 k3 s2 p1" or
// "pool max k3 s2 ceil". Fields at their defaults are left out.
func Summary(l *Layer) string {
	var b strings.Builder
	b.WriteString(l.Kind.String())
	word := func(s string) { b.WriteByte(' '); b.WriteString(s) }
	num := func(prefix string, p Pair) { word(prefix + pairText(p)) }
	switch l.Kind {
	case KindConv, KindDeconv, KindDense:
		word(strconv.FormatInt(l.Filters, 10))
	case KindPool, KindGlobalPool:
		word(l.Pool.String())
	case KindPoolTo:
		word(pairText(l.Size))
	case KindUpsample:
		word(pairText(l.Factor))
		if l.Upsample == UpBilinear {
			word("bilinear")
		}
	case KindNorm:
		word(l.Norm.String())
		if l.Norm == NormGroup {
			word("g" + strconv.FormatInt(l.NormGroups, 10))
		}
		if l.Affine == On && l.Norm == NormInstance {
			word("affine")
		} else if l.Affine == Off && l.Norm != NormInstance {
			word("noaffine")
		}
	case KindAct:
		word(l.Act.String())
		if l.Act == ActLeakyReLU && l.Slope != 0 {
			word(strconv.FormatFloat(l.Slope, 'g', -1, 64))
		}
	case KindDropout:
		word(strconv.FormatFloat(l.Rate, 'g', -1, 64))
	case KindBlock:
		word("×" + strconv.FormatInt(max(l.Repeat, 1), 10))
		if l.Residual {
			word("residual")
			if l.HasPostAct {
				word("then " + l.PostAct.String())
			}
		}
		if l.AllStrides {
			word("strides-all")
		}
	case KindConcat, KindAdd:
		if l.From != "" {
			word(l.From)
		}
		if l.Crop {
			word("crop")
		}
	case KindReshape:
		word(strconv.FormatInt(l.Target.C, 10) + "x" + strconv.FormatInt(l.Target.H, 10) + "x" + strconv.FormatInt(l.Target.W, 10))
	}
	switch l.Kind {
	case KindConv, KindDeconv, KindPool:
		num("k", l.Kernel)
		if s := l.stride(); (l.Kind == KindPool && s != l.Kernel) || (l.Kind != KindPool && s != Square(1)) {
			num("s", s)
		}
		switch l.Pad.Mode {
		case PadSame:
			word("same")
		case PadValid:
			word("valid")
		default:
			if !l.Pad.Size.IsZero() {
				num("p", l.Pad.Size)
			}
		}
	}
	switch l.Kind {
	case KindConv, KindDeconv:
		if d := l.dilation(); d != Square(1) {
			num("d", d)
		}
		if l.Depthwise {
			word("dw")
		} else if l.Groups > 1 {
			word("g" + strconv.FormatInt(l.Groups, 10))
		}
		if l.Kind == KindDeconv && !l.OutPad.IsZero() {
			num("op", l.OutPad)
		}
	case KindPool:
		if l.Ceil {
			word("ceil")
		}
	}
	if l.Kind.HasWeights() && l.NoBias {
		word("nobias")
	}
	return b.String()
}

// RowSummary is Summary of the layer as the row computed it: in later
// repeats of a block, strides count as 1.
func RowSummary(r *Row) string {
	if r.Layer == nil {
		return ""
	}
	if r.Role == RoleResidual {
		return "add shortcut"
	}
	if !r.Unstrided {
		return Summary(r.Layer)
	}
	l := *r.Layer
	l.Stride = Square(1)
	return Summary(&l)
}

// pairText writes "3" for a square pair and "3x5" otherwise.
func pairText(p Pair) string {
	if p.H == p.W {
		return strconv.FormatInt(p.H, 10)
	}
	return strconv.FormatInt(p.H, 10) + "x" + strconv.FormatInt(p.W, 10)
}
