package engine

import (
	"fmt"
	"strconv"
)

// The window fields convolution, transposed convolution and pooling share.
var (
	kernelParam = Param{Key: "kernel", Help: "n or h×w, e.g. 3 or 3x5", Type: TPair, Lo: 1, Hi: MaxWindow,
		Quick: "k", Required: true, Need: "needs a kernel", YAMLHint: "kernel: 3 or kernel: [3, 5]", QuickHint: "k3 (or k3x5)",
		get: func(l *Layer) Value { return Value{Pair: l.Kernel} },
		set: func(l *Layer, v Value) { l.Kernel = v.Pair }}
	strideParam = Param{Key: "stride", Help: "n or h×w", Type: TPair, Lo: 1, Hi: MaxWindow, Quick: "s",
		get:  func(l *Layer) Value { return Value{Pair: l.Stride} },
		set:  func(l *Layer, v Value) { l.Stride = v.Pair },
		show: func(l *Layer) Value { return Value{Pair: l.stride()} }}
	padParam = Param{Key: "pad", Help: "n, h×w, same or valid", Type: TPad, Lo: 0, Hi: MaxWindow, Quick: "p", Words: []string{"same", "valid"},
		get: func(l *Layer) Value { return Value{Pad: l.Pad} },
		set: func(l *Layer, v Value) { l.Pad = v.Pad }}
	dilationParam = Param{Key: "dilation", Help: "n or h×w", Type: TPair, Lo: 1, Hi: MaxWindow, Quick: "d",
		get:  func(l *Layer) Value { return Value{Pair: l.Dilation} },
		set:  func(l *Layer, v Value) { l.Dilation = v.Pair },
		show: func(l *Layer) Value { return Value{Pair: l.dilation()} }}
	groupsParam = Param{Key: "groups", Help: "n or depthwise", Type: TGroups, Lo: 1, Hi: MaxChannels, Quick: "g", Words: []string{"dw"},
		Want: "give a whole number or depthwise",
		get:  func(l *Layer) Value { return Value{Int: l.Groups, Bool: l.Depthwise} },
		set: func(l *Layer, v Value) {
			l.Groups, l.Depthwise = v.Int, v.Bool
			if v.Bool {
				l.Groups = 0
			}
		}}
	biasParam = Param{Key: "bias", Help: "yes, no or default", Type: TToggle, Words: []string{"", "bias", "nobias"},
		FileDefault: true, Want: "give yes, no or default",
		get: func(l *Layer) Value {
			switch {
			case l.NoBias:
				return Value{Int: int64(Off)}
			case l.BiasOn:
				return Value{Int: int64(On)}
			}
			return Value{}
		},
		set: func(l *Layer, v Value) { l.NoBias, l.BiasOn = Toggle(v.Int) == Off, Toggle(v.Int) == On },
		show: func(l *Layer) Value {
			if l.NoBias {
				return Value{Int: int64(Off)}
			}
			return Value{Int: int64(On)}
		}}
	groupWidthParam = Param{Key: "group-width", Help: "channels per group: groups = input channels / this (RegNet's group width), or 0 for none",
		Type: TInt, Lo: 0, Hi: MaxChannels, Quick: "gw",
		Only:      func(l *Layer) bool { return l.GroupWidth != 0 && !l.Depthwise && l.Groups <= 1 },
		OnlyMsg:   "group-width (from 1) sets the groups itself; remove groups, or remove group-width",
		OnlyQuick: "sets the groups itself; drop g",
		get:       func(l *Layer) Value { return Value{Int: l.GroupWidth} },
		set:       func(l *Layer, v Value) { l.GroupWidth = v.Int }}
)

// filtersParam is the main value of both convolutions.
var filtersParam = Param{Key: "filters", Help: "output channels: 1 to 16777216, xF (F times the input, e.g. x6) or /D (e.g. /4)",
	Type: TWidth, Lo: 1, Hi: MaxChannels, Label: "filters", Need: "a filter count",
	get: func(l *Layer) Value { return Value{Int: l.Filters, Rel: l.Rel} },
	set: setWidth}

// setWidth stores an absolute or a relative width.
func setWidth(l *Layer, v Value) {
	l.Filters, l.Rel = v.Int, v.Rel
	if !v.Rel.IsZero() {
		l.Filters = 0
	}
}

var convSpec = Spec{
	Kind: KindConv, Key: "conv", Help: "convolution: filters over a sliding window", Example: "conv 64 k3 s2 p1",
	Main:       &filtersParam,
	Params:     append([]Param{kernelParam, strideParam, padParam, dilationParam, groupsParam, groupWidthParam, biasParam}, widthParams...),
	Weighted:   true,
	eval:       func(c *calc, f *flow) { c.conv(f, false) },
	keepLayout: true,
	explain:    explainConv,
	saved:      func(row *Row, s *saving) int64 { return s.input(row) },
	torch:      torchConv,
	work:       convWork,
}

var deconvSpec = Spec{
	Kind: KindDeconv, Key: "deconv", Help: "transposed convolution: upsamples with learned filters", Example: "deconv 32 k4 s2 p1",
	Main: &filtersParam,
	Params: []Param{kernelParam, strideParam, padParam, dilationParam, groupsParam, groupWidthParam,
		{Key: "out-pad", Help: "n or h×w, below the stride", Type: TPair, Lo: 0, Hi: MaxWindow, Quick: "op",
			get: func(l *Layer) Value { return Value{Pair: l.OutPad} },
			set: func(l *Layer, v Value) { l.OutPad = v.Pair }},
		biasParam, widthParams[0], widthParams[1]},
	Weighted: true,
	eval:     func(c *calc, f *flow) { c.conv(f, true) },
	explain:  explainConv,
	saved:    func(row *Row, s *saving) int64 { return s.input(row) },
	torch:    torchConv,
	work:     convWork,
}

// rowStride is the stride a row ran with: 1 in later repeats of a block.
func rowStride(row *Row) Pair {
	if row.Unstrided {
		return Square(1)
	}
	return row.Layer.stride()
}

// rowPadding is the padding a row applied, before and after.
func rowPadding(row *Row) (before, after Pair) {
	l := *row.Layer
	if row.Unstrided {
		l.Stride = Pair{}
	}
	return l.ResolvedPadding(row.In)
}

func explainConv(row *Row) []string {
	l, in := row.Layer, row.In
	s, d := rowStride(row), l.dilation()
	var out []string
	if l.Kind == KindDeconv {
		out = append(out, pairLine("out", row.Out,
			fmt.Sprintf("(%d − 1)·%d − 2·%d + %s + %d + 1", in.H, s.H, l.Pad.Size.H, keffText(l.Kernel.H, d.H), l.OutPad.H),
			fmt.Sprintf("(%d − 1)·%d − 2·%d + %s + %d + 1", in.W, s.W, l.Pad.Size.W, keffText(l.Kernel.W, d.W), l.OutPad.W)))
	} else {
		out = append(out, axisLines(l, in, row.Out, s, d)...)
	}
	g := l.GroupsFor(in.C)
	filters := row.Out.C
	w := filters * (in.C / g) * l.Kernel.H * l.Kernel.W
	bias := ""
	if !l.NoBias {
		bias = fmt.Sprintf(" + %d", filters)
	}
	perGroup := strconv.FormatInt(in.C, 10)
	if g > 1 {
		perGroup = fmt.Sprintf("(%d/%d)", in.C, g)
	}
	if l.GroupWidth > 0 && !l.Depthwise && l.Groups <= 1 {
		out = append(out, fmt.Sprintf("groups = %d input channels / group width %d = %d", in.C, l.GroupWidth, g))
	}
	out = append(out, fmt.Sprintf("params = %d·%d·%s·%d%s = %s", l.Kernel.H, l.Kernel.W, perGroup, filters, bias, GroupDigits(row.Params)))
	if !l.Rel.IsZero() {
		out = append(out, widthLine(row))
	}
	pos := fmt.Sprintf("%d·%d output positions", row.Out.H, row.Out.W)
	if l.Kind == KindDeconv {
		pos = fmt.Sprintf("%d·%d input positions", in.H, in.W)
	}
	return append(out, fmt.Sprintf("MACs = %s weights × %s = %s", GroupDigits(w), pos, FormatCount(row.MACs)))
}

func torchConv(row *Row) Torch {
	l, in := row.Layer, row.In
	groups := l.GroupsFor(in.C)
	var t Torch
	pad := "(0, 0)"
	switch l.Pad.Mode {
	case PadExplicit:
		pad = tuple(l.Pad.Size)
	case PadSame:
		before, after := rowPadding(row)
		if before == after {
			pad = tuple(before)
		} else if l.Kind == KindConv {
			t.Pad = fmt.Sprintf("nn.ZeroPad2d((%d, %d, %d, %d))", before.W, after.W, before.H, after.H)
		}
	}
	stride := rowStride(row)
	if l.Kind == KindDeconv {
		t.Module = fmt.Sprintf("nn.ConvTranspose2d(%d, %d, %s, stride=%s, padding=%s, output_padding=%s, groups=%d, bias=%s, dilation=%s)",
			in.C, row.Out.C, tuple(l.Kernel), tuple(stride), pad, tuple(l.OutPad), groups, pyBool(!l.NoBias), tuple(l.dilation()))
		return t
	}
	t.Module = fmt.Sprintf("nn.Conv2d(%d, %d, %s, stride=%s, padding=%s, dilation=%s, groups=%d, bias=%s)",
		in.C, row.Out.C, tuple(l.Kernel), tuple(stride), pad, tuple(l.dilation()), groups, pyBool(!l.NoBias))
	return t
}

// tuple writes a pair as a Python tuple.
func tuple(p Pair) string { return fmt.Sprintf("(%d, %d)", p.H, p.W) }

// pyBool writes a Python boolean.
func pyBool(b bool) string {
	if b {
		return "True"
	}
	return "False"
}

// GroupsFor returns the channel groups of a convolution with cin input
// channels: the input channels when depthwise, cin / GroupWidth with a
// group width, else Groups (at least 1). Evaluation reports a group width
// that does not divide the input; this returns at least 1 regardless.
func (l *Layer) GroupsFor(cin int64) int64 {
	switch {
	case l.Depthwise:
		return max(cin, 1)
	case l.Groups <= 1 && l.GroupWidth > 0:
		return max(cin/l.GroupWidth, 1)
	}
	return max(l.Groups, 1)
}

// groups resolves and checks the channel groups of a (transposed)
// convolution of filters outputs.
func (c *calc) groups(cin, filters int64) (int64, bool) {
	g := c.l.Groups
	switch {
	case c.l.Depthwise:
		g = cin
	case g <= 1 && c.l.GroupWidth != 0:
		if !c.atLeast("group-width", c.l.GroupWidth, 1) {
			return 0, false
		}
		if cin%c.l.GroupWidth != 0 {
			c.fail(Diagnostic{Code: ErrGroupWidth, Field: "group-width", A: cin, B: c.l.GroupWidth})
			return 0, false
		}
		g = cin / c.l.GroupWidth
	case g == 0:
		g = 1
	}
	if !c.atLeast("groups", g, 1) {
		return 0, false
	}
	if cin%g != 0 {
		c.fail(Diagnostic{Code: ErrGroupsChannels, Field: "groups", A: cin, B: g})
		return 0, false
	}
	if filters%g != 0 {
		c.fail(Diagnostic{Code: ErrGroupsFilters, Field: "groups", A: filters, B: g})
		return 0, false
	}
	return g, true
}

// conv handles convolution and transposed convolution.
func (c *calc) conv(f *flow, transposed bool) {
	l, in := c.l, c.row.In
	k, s, d := l.Kernel, c.stride(), l.dilation()
	filters, ok := l.Filters, true
	if !l.Rel.IsZero() || filters < 1 { // the common absolute width skips the call
		if filters, ok = c.width("filters"); !ok {
			return
		}
	}
	if min(k.H, k.W, s.H, s.W, d.H, d.W) < 1 {
		// Name the first field at fault.
		_ = c.atLeast("kernel", min(k.H, k.W), 1) &&
			c.atLeast("stride", min(s.H, s.W), 1) && c.atLeast("dilation", min(d.H, d.W), 1)
		return
	}
	g, cin := int64(1), in.C
	if l.Groups > 1 || l.Depthwise || l.Groups < 0 || l.GroupWidth != 0 {
		if g, ok = c.groups(in.C, filters); !ok {
			return
		}
		cin = in.C / g
	}
	var out Shape
	out.C = filters
	n0 := len(c.r.Diags)
	if transposed {
		out.H, ok = c.deconvAxis('h', in.H, k.H, s.H, d.H, l.Pad, l.Pad.Size.H, l.OutPad.H)
		if ok {
			out.W, ok = c.deconvAxis('w', in.W, k.W, s.W, d.W, l.Pad, l.Pad.Size.W, l.OutPad.W)
		}
	} else {
		out.H, _, _, ok = c.window('h', in.H, k.H, s.H, d.H, l.Pad, l.Pad.Size.H, false, false)
		if ok {
			out.W, _, _, ok = c.window('w', in.W, k.W, s.W, d.W, l.Pad, l.Pad.Size.W, false, false)
		}
		if len(c.r.Diags) > n0 {
			c.mergeAxes(n0)
		}
	}
	if !ok {
		return
	}
	// Weight tensor: filters × (in/groups) × kh × kw for both directions
	// (PyTorch stores the transposed one as in × (filters/groups) × kh × kw,
	// the same count).
	w := mul(&c.ov, mul(&c.ov, mul(&c.ov, filters, cin), k.H), k.W)
	params := w
	if !l.NoBias {
		params = add(&c.ov, params, filters)
	}
	// One MAC per weight use: each weight meets every output position of a
	// convolution, and every input position of a transposed convolution.
	var macs int64
	if transposed {
		macs = mul(&c.ov, mul(&c.ov, w, in.H), in.W)
	} else {
		macs = mul(&c.ov, mul(&c.ov, w, out.H), out.W)
	}
	if !c.checkOverflow("parameters or MACs") {
		return
	}
	c.row.Out, c.row.Params, c.row.MACs = out, params, macs
	kh, kw := float64(d.H*(k.H-1)+1), float64(d.W*(k.W-1)+1)
	if transposed {
		// Each output of a transposed convolution gathers ⌈k_eff/s⌉ inputs.
		f.rf.H += (ceilDivF(kh, float64(s.H)) - 1) * f.jump.H
		f.rf.W += (ceilDivF(kw, float64(s.W)) - 1) * f.jump.W
		f.jump.H /= float64(s.H)
		f.jump.W /= float64(s.W)
		return
	}
	f.rf.H += (kh - 1) * f.jump.H
	f.rf.W += (kw - 1) * f.jump.W
	f.jump.H *= float64(s.H)
	f.jump.W *= float64(s.W)
}

func ceilDivF(a, b float64) float64 {
	q := float64(int64(a / b))
	if q*b < a {
		q++
	}
	return q
}

// deconvAxis computes one axis of a transposed convolution:
// o = (i − 1)·s − 2p + d(k − 1) + output_padding + 1.
func (c *calc) deconvAxis(ax byte, in, k, s, d int64, pad Padding, p, op int64) (int64, bool) {
	switch pad.Mode {
	case PadSame:
		c.fail(Diagnostic{Code: ErrSamePad, Field: "a transposed convolution"})
		return 0, false
	case PadValid:
		p = 0
	}
	if !c.atLeast("padding", p, 0) || !c.atLeast("output padding", op, 0) {
		return 0, false
	}
	if op >= s && op >= d {
		c.fail(Diagnostic{Code: ErrOutPad, Field: "output padding", Axis: ax, A: op, B: s, C: d})
		return 0, false
	}
	grow := add(&c.ov, mul(&c.ov, in-1, s), add(&c.ov, mul(&c.ov, d, k-1), add(&c.ov, op, 1)))
	shrink := mul(&c.ov, 2, p)
	if !c.checkOverflow("output size") {
		return 0, false
	}
	out := grow - shrink
	if out < 1 {
		c.fail(Diagnostic{Code: ErrOutputSize, Field: "padding", Axis: ax, A: out, B: in})
		return 0, false
	}
	return out, true
}

// convWork is both convolutions' time-estimate rule: weighted (2 FLOPs per
// MAC forward, about twice that backward), as a grouped convolution when
// the layer has groups (depthwise included), else a dense one.
func convWork(row *Row) Work {
	l := row.Layer
	switch {
	case l.Depthwise || l.Groups > 1 || l.GroupsFor(row.In.C) > 1:
		return weightedWork(row, ClassGrouped)
	case l.Kernel.H == 1 && l.Kernel.W == 1 && (row.Unstrided || l.EffectiveStride() == Square(1)):
		return weightedWork(row, ClassPointwise)
	}
	return weightedWork(row, ClassConv)
}
