package engine

// calc computes one layer's row; any error it records marks the row failed.
type calc struct {
	r          *Result
	idx        int
	row        *Row
	l          *Layer
	unstrided  bool // later repeat of a block: strides count as 1
	failed     bool
	unresolved bool // a merged input is unknown
	ov         bool // an overflow-checked product overflowed
}

// stride returns the layer's effective stride in this row.
func (c *calc) stride() Pair {
	if c.unstrided {
		return Square(1)
	}
	return c.l.stride()
}

//go:noinline
func (c *calc) fail(d Diagnostic) {
	d.Severity = SevError
	d.Row = c.idx
	c.r.diag(d)
	c.failed = true
}

//go:noinline
func (c *calc) warn(d Diagnostic) {
	d.Severity = SevWarning
	d.Row = c.idx
	c.r.diag(d)
}

// atLeast records an ErrValue unless v ≥ min.
func (c *calc) atLeast(field string, v, min int64) bool {
	if v < min {
		c.fail(Diagnostic{Code: ErrValue, Field: field, A: v, B: min})
		return false
	}
	return true
}

// checkOverflow turns a pending overflow into an error naming field.
func (c *calc) checkOverflow(field string) bool {
	if c.ov {
		c.fail(Diagnostic{Code: ErrOverflow, Field: field})
		c.ov = false
		return false
	}
	return true
}

// run dispatches on the layer kind.
func (c *calc) run(f *flow) {
	switch c.l.Kind {
	case KindConv:
		c.conv(f, false)
	case KindDeconv:
		c.conv(f, true)
	case KindPool:
		c.pool(f)
	case KindGlobalPool:
		in := c.row.In
		c.row.Out = Shape{in.C, 1, 1}
		c.wholeMap(f, in)
	case KindPoolTo:
		c.poolTo(f)
	case KindUpsample:
		c.upsample(f)
	case KindNorm:
		c.norm()
	case KindAct, KindDropout:
		c.row.Out = c.row.In
	case KindFlatten:
		in := c.row.In
		n, ov := in.Elements()
		if ov {
			c.fail(Diagnostic{Code: ErrOverflow, Field: "flattened size"})
			return
		}
		c.row.Out = Shape{n, 1, 1}
		c.wholeMap(f, in)
	case KindDense:
		c.dense()
	case KindReshape:
		c.reshape()
	case KindConcat, KindAdd:
		c.merge(f)
	case KindBlock: // only a block nested too deep is evaluated as a row
		c.fail(Diagnostic{Code: ErrNesting, Field: "block"})
	default:
		c.fail(Diagnostic{Code: ErrValue, Field: "kind", A: int64(c.l.Kind), B: 1})
	}
}

// wholeMap extends the receptive field over an entire H×W map, as a layer
// whose every output depends on every position does.
func (c *calc) wholeMap(f *flow, in Shape) {
	f.rf.H += float64(in.H-1) * f.jump.H
	f.rf.W += float64(in.W-1) * f.jump.W
	f.jump.H *= float64(in.H)
	f.jump.W *= float64(in.W)
}

// groups resolves and checks the channel groups of a (transposed) convolution.
func (c *calc) groups(cin int64) (int64, bool) {
	g := c.l.Groups
	if c.l.Depthwise {
		g = cin
	} else if g == 0 {
		g = 1
	}
	if !c.atLeast("groups", g, 1) {
		return 0, false
	}
	if cin%g != 0 {
		c.fail(Diagnostic{Code: ErrGroupsChannels, Field: "groups", A: cin, B: g})
		return 0, false
	}
	if c.l.Filters%g != 0 {
		c.fail(Diagnostic{Code: ErrGroupsFilters, Field: "groups", A: c.l.Filters, B: g})
		return 0, false
	}
	return g, true
}

// conv handles convolution and transposed convolution.
func (c *calc) conv(f *flow, transposed bool) {
	l, in := c.l, c.row.In
	k, s, d := l.Kernel, c.stride(), l.dilation()
	if min(l.Filters, k.H, k.W, s.H, s.W, d.H, d.W) < 1 {
		// Slow path: name the first field at fault.
		_ = c.atLeast("filters", l.Filters, 1) && c.atLeast("kernel", min(k.H, k.W), 1) &&
			c.atLeast("stride", min(s.H, s.W), 1) && c.atLeast("dilation", min(d.H, d.W), 1)
		return
	}
	g, cin := int64(1), in.C
	var ok bool
	if l.Groups > 1 || l.Depthwise || l.Groups < 0 {
		if g, ok = c.groups(in.C); !ok {
			return
		}
		cin = in.C / g
	}
	var out Shape
	out.C = l.Filters
	if transposed {
		out.H, ok = c.deconvAxis('h', in.H, k.H, s.H, d.H, l.Pad, l.Pad.Size.H, l.OutPad.H)
		if ok {
			out.W, ok = c.deconvAxis('w', in.W, k.W, s.W, d.W, l.Pad, l.Pad.Size.W, l.OutPad.W)
		}
	} else {
		out.H, out.W, ok = fastWindow(in, k, s, d, l.Pad)
		if !ok {
			n0 := len(c.r.Diags)
			out.H, _, _, ok = c.window('h', in.H, k.H, s.H, d.H, l.Pad, l.Pad.Size.H, false, false)
			if ok {
				out.W, _, _, ok = c.window('w', in.W, k.W, s.W, d.W, l.Pad, l.Pad.Size.W, false, false)
			}
			if len(c.r.Diags) > n0 {
				c.mergeAxes(n0)
			}
		}
	}
	if !ok {
		return
	}
	// Weight tensor: filters × (in/groups) × kh × kw for both directions
	// (PyTorch stores the transposed one as in × (filters/groups) × kh × kw,
	// the same count).
	w := mul(&c.ov, mul(&c.ov, mul(&c.ov, l.Filters, cin), k.H), k.W)
	params := w
	if !l.NoBias {
		params = add(&c.ov, params, l.Filters)
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

// fastWindow computes a convolution's output size in the common case:
// explicit padding, sizes far from overflow, no rows dropped by the stride.
// It reports clean = false whenever the full check in window might have
// something to say, and then the caller runs window instead.
func fastWindow(in Shape, k, s, d Pair, pad Padding) (oh, ow int64, clean bool) {
	const small = 1 << 24
	p := pad.Size
	if pad.Mode != PadExplicit || max(in.H, in.W, k.H, k.W, s.H, s.W, d.H, d.W, p.H, p.W) >= small || min(p.H, p.W) < 0 {
		return 0, 0, false
	}
	spanH := in.H + 2*p.H - d.H*(k.H-1) - 1
	spanW := in.W + 2*p.W - d.W*(k.W-1) - 1
	if spanH < 0 || spanW < 0 {
		return 0, 0, false
	}
	if s.H == 1 && s.W == 1 {
		return spanH + 1, spanW + 1, true
	}
	if spanH%s.H > p.H || spanW%s.W > p.W {
		return 0, 0, false
	}
	return spanH/s.H + 1, spanW/s.W + 1, true
}

// window computes one axis of a sliding-window layer (convolution or
// pooling): o = ⌊(i + 2p − d(k−1) − 1)/s⌋ + 1, rounded up instead when ceil
// is set (dropping a last window that would start in the right padding), or
// o = ⌈i/s⌉ for "same" padding.
func (c *calc) window(ax byte, in, k, s, d int64, pad Padding, p int64, ceil, pool bool) (out, before, after int64, ok bool) {
	keff := add(&c.ov, mul(&c.ov, d, k-1), 1)
	if !c.checkOverflow("kernel") {
		return 0, 0, 0, false
	}
	switch pad.Mode {
	case PadSame:
		out = (in-1)/s + 1 // ⌈in/s⌉ without overflow
		total := add(&c.ov, (out-1)*s, keff) - in
		if !c.checkOverflow("padding") {
			return 0, 0, 0, false
		}
		if total < 0 {
			total = 0
		}
		if total%2 == 1 {
			c.warn(Diagnostic{Code: WarnSameAsym, Field: "padding", Axis: ax, A: total})
		}
		return out, total / 2, total - total/2, true
	case PadValid:
		p = 0
	}
	if !c.atLeast("padding", p, 0) {
		return 0, 0, 0, false
	}
	if pool && 2*p > keff {
		c.fail(Diagnostic{Code: ErrPoolPad, Field: "padding", Axis: ax, A: p, B: keff})
		return 0, 0, 0, false
	}
	padded := add(&c.ov, in, mul(&c.ov, 2, p))
	if !c.checkOverflow("padding") {
		return 0, 0, 0, false
	}
	span := padded - keff
	if ceil {
		// PyTorch's pooling rule: o = ⌊(span + s − 1)/s⌋ + 1 rounding toward
		// −∞, less one when the last window would start in the padding. A
		// window may overhang a small input, as long as one output remains.
		num := span + s - 1
		out = num / s
		if num < 0 && num%s != 0 {
			out--
		}
		out++
		if (out-1)*s >= in+p {
			out--
		}
		if out < 1 {
			c.fail(Diagnostic{Code: ErrOutputSize, Field: "kernel", Axis: ax, A: out, B: in})
			return 0, 0, 0, false
		}
		return out, p, p, true
	}
	if padded < keff {
		c.fail(Diagnostic{Code: ErrKernelTooLarge, Field: "kernel", Axis: ax, A: keff, B: padded})
		return 0, 0, 0, false
	}
	if s == 1 {
		out = span + 1
	} else {
		out = span/s + 1
		if lost := span%s - p; lost > 0 && c.row.Role != RoleShortcut {
			c.warn(Diagnostic{Code: WarnStrideDrop, Field: "stride", Axis: ax, A: s, B: lost, C: in, D: p, E: keff})
		}
	}
	return out, p, p, true
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

func (c *calc) pool(f *flow) {
	l, in := c.l, c.row.In
	k, s := l.Kernel, c.stride()
	if !c.atLeast("kernel", min(k.H, k.W), 1) || !c.atLeast("stride", min(s.H, s.W), 1) {
		return
	}
	if l.Pad.Mode == PadSame {
		c.fail(Diagnostic{Code: ErrSamePad, Field: "pooling"})
		return
	}
	var out Shape
	var ok bool
	out.C = in.C
	n0 := len(c.r.Diags)
	out.H, _, _, ok = c.window('h', in.H, k.H, s.H, 1, l.Pad, l.Pad.Size.H, l.Ceil, true)
	if ok {
		out.W, _, _, ok = c.window('w', in.W, k.W, s.W, 1, l.Pad, l.Pad.Size.W, l.Ceil, true)
	}
	if len(c.r.Diags) > n0 {
		c.mergeAxes(n0)
	}
	if !ok {
		return
	}
	c.row.Out = out
	f.rf.H += float64(k.H-1) * f.jump.H
	f.rf.W += float64(k.W-1) * f.jump.W
	f.jump.H *= float64(s.H)
	f.jump.W *= float64(s.W)
}

// adaptiveWindow returns the widest window adaptive pooling uses to map in
// positions onto out: windows run from ⌊i·in/out⌋ to ⌈(i+1)·in/out⌉.
func adaptiveWindow(in, out int64) int64 {
	if in%out == 0 {
		return in / out
	}
	if out > 4096 {
		return in/out + 2
	}
	var widest int64
	for i := int64(0); i < out; i++ {
		start := i * in / out
		end := ((i+1)*in + out - 1) / out
		widest = max(widest, end-start)
	}
	return widest
}

func (c *calc) poolTo(f *flow) {
	in, sz := c.row.In, c.l.Size
	if !c.atLeast("size", min(sz.H, sz.W), 1) {
		return
	}
	c.row.Out = Shape{in.C, sz.H, sz.W}
	wh, ww := adaptiveWindow(in.H, sz.H), adaptiveWindow(in.W, sz.W)
	f.rf.H += float64(wh-1) * f.jump.H
	f.rf.W += float64(ww-1) * f.jump.W
	f.jump.H *= float64(in.H) / float64(sz.H)
	f.jump.W *= float64(in.W) / float64(sz.W)
}

func (c *calc) upsample(f *flow) {
	in, fa := c.row.In, c.l.Factor
	if !c.atLeast("factor", min(fa.H, fa.W), 1) {
		return
	}
	out := Shape{in.C, mul(&c.ov, in.H, fa.H), mul(&c.ov, in.W, fa.W)}
	if !c.checkOverflow("output size") {
		return
	}
	c.row.Out = out
	if c.l.Upsample == UpBilinear {
		// Bilinear interpolation mixes two neighbours per axis.
		if fa.H > 1 {
			f.rf.H += f.jump.H
		}
		if fa.W > 1 {
			f.rf.W += f.jump.W
		}
	}
	f.jump.H /= float64(fa.H)
	f.jump.W /= float64(fa.W)
}

func (c *calc) norm() {
	in := c.row.In
	l := c.l
	c.row.Out = in
	switch l.Norm {
	case NormGroup:
		if !c.atLeast("groups", l.NormGroups, 1) {
			return
		}
		if in.C%l.NormGroups != 0 {
			c.fail(Diagnostic{Code: ErrNormGroups, Field: "groups", A: in.C, B: l.NormGroups})
			return
		}
	case NormInstance:
		if !in.Spatial() {
			c.fail(Diagnostic{Code: ErrNormSingle, Field: "norm"})
			return
		}
	case NormBatch:
		// running mean, running variance and a step counter.
		c.row.Buffers = add(&c.ov, mul(&c.ov, 2, in.C), 1)
	}
	if l.Affine.Or(l.Norm != NormInstance) {
		c.row.Params = mul(&c.ov, 2, in.C)
	}
	c.checkOverflow("parameters")
}

func (c *calc) dense() {
	in, l := c.row.In, c.l
	if !c.atLeast("units", l.Filters, 1) {
		return
	}
	if in.Spatial() {
		c.fail(Diagnostic{Code: ErrDenseSpatial, Field: "input", A: in.C, B: in.H, C: in.W})
		return
	}
	w := mul(&c.ov, in.C, l.Filters)
	params := w
	if !l.NoBias {
		params = add(&c.ov, w, l.Filters)
	}
	if !c.checkOverflow("parameters") {
		return
	}
	c.row.Out = Shape{l.Filters, 1, 1}
	c.row.Params, c.row.MACs = params, w
}

func (c *calc) reshape() {
	t := c.l.Target
	if !c.atLeast("target channels", t.C, 1) || !c.atLeast("target height", t.H, 1) || !c.atLeast("target width", t.W, 1) {
		return
	}
	want, ov1 := t.Elements()
	have, ov2 := c.row.In.Elements()
	if ov1 || ov2 {
		c.fail(Diagnostic{Code: ErrOverflow, Field: "reshape size"})
		return
	}
	if want != have {
		c.fail(Diagnostic{Code: ErrReshapeCount, Field: "reshape", A: want, B: have})
		return
	}
	c.row.Out = t
}

// mergeAxes folds a pair of identical height and width warnings recorded
// since diagnostic n0 into one warning about both axes.
func (c *calc) mergeAxes(n0 int) {
	ds := c.r.Diags
	if len(ds)-n0 != 2 {
		return
	}
	a, b := ds[n0], ds[n0+1]
	b.Axis = a.Axis
	if a.Axis == 'h' && ds[n0+1].Axis == 'w' && a == b {
		c.r.Diags[n0].Axis = 'b'
		c.r.Diags = ds[:n0+1]
		c.r.Warnings--
	}
}
