package engine

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// scaleSpec is a learnable factor per channel, out = x · γ_c: the layer
// scale of Touvron et al. 2021 (CaiT) as ConvNeXt uses it on its residual
// branches (Liu et al. 2022), γ starting at a small value such as 1e-6.
var scaleSpec = Spec{
	Kind: KindScale, Key: "scale", Help: "multiply each channel by a learnable factor (layer scale)", Example: "scale 1e-6",
	Main: &Param{Key: "init", Help: "value every factor starts at, e.g. 1e-6; 1 when left out", Type: TFloat, FLo: 0, FHi: 1e6,
		Label: "initial factor", Optional: true, Default: Value{Float: 1},
		Want: "give a number from 0 and below 1e6, e.g. 1e-6",
		get:  func(l *Layer) Value { return Value{Float: l.ScaleInit} },
		set:  func(l *Layer, v Value) { l.ScaleInit = v.Float }},
	Bare: true,
	eval: func(c *calc, f *flow) {
		c.row.Out = c.row.In
		c.row.Params = c.row.In.C // one factor per channel; the start value changes no count
	},
	explain: func(row *Row) []string {
		in := row.In
		return []string{
			fmt.Sprintf("params = %s (one factor per channel, each starting at %s)", GroupDigits(row.Params), strconv.FormatFloat(row.Layer.ScaleInit, 'g', -1, 64)),
			fmt.Sprintf("out = map × factor of its channel: %d·%d·%d products, 0 MACs by our convention", in.C, in.H, in.W),
		}
	},
	// x · γ keeps x for γ's gradient (and γ, a parameter, for x's), as
	// autograd's mul does.
	saved:      func(row *Row, s *saving) int64 { return s.input(row) },
	keepLayout: true,
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("ChannelScale(%d, init=%s)", row.In.C, pyFloat(row.Layer.ScaleInit))}
	},
}

// pyFloat writes v as a Python float ("1.0", "1e-06", float("inf")).
func pyFloat(v float64) string {
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return fmt.Sprintf("float(%q)", strings.ToLower(strconv.FormatFloat(v, 'g', -1, 64)))
	}
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if !strings.ContainsAny(s, ".eIN") {
		s += ".0"
	}
	return s
}
