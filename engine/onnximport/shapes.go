package onnximport

import (
	"slices"

	"stackfit/engine/onnximport/onnxpb"
)

// maxDim bounds every dimension the shape pass computes: a larger one (a
// hostile graph) leaves the shape unknown.
const maxDim = 1 << 31

// inputShape is the data input's full shape, the batch 1 where the file
// leaves it open.
func inputShape(g *onnxpb.Graph, x string) []int64 {
	for _, v := range g.GetInput() {
		if v.GetName() != x {
			continue
		}
		var sh []int64
		for i, d := range v.GetType().GetTensorType().GetShape().GetDim() {
			s := d.GetSize()
			if i == 0 && s < 1 {
				s = 1
			}
			if s < 1 || s > maxDim {
				return nil
			}
			sh = append(sh, s)
		}
		return sh
	}
	return nil
}

// axisOf turns a possibly negative axis into an index into rank dims.
func axisOf(a, rank int64) (int, bool) {
	if a < 0 {
		a += rank
	}
	return int(a), a >= 0 && a < rank
}

// windowOut is a convolution's or pooling's output size along one axis.
func windowOut(in, k, s, p0, p1, d int64, ceil bool) int64 {
	span := in + p0 + p1 - d*(k-1) - 1
	if span < 0 || s < 1 {
		return -1
	}
	o := span / s
	if ceil && span%s != 0 {
		o++
		if o*s >= in+p0 { // the last window must start inside the map or its left padding
			o--
		}
	}
	return o + 1
}

// infer computes the output shapes of kept node n from its inputs'
// shapes (shapeOf) where the operator is one the stack reads; an output
// left unknown is simply absent from shapes.
func (im *importer) infer(n *onnxpb.Node, shapeOf func(string) []int64, shapes map[string][]int64) {
	ins := n.GetInput()
	outs := n.GetOutput()
	if len(ins) == 0 || len(outs) == 0 {
		return
	}
	x := shapeOf(ins[0])
	set := func(o string, sh []int64) {
		for _, v := range sh {
			if v < 0 || v > maxDim {
				return
			}
		}
		shapes[o] = sh
	}
	if x == nil {
		return
	}
	in := func(i int) string {
		if i < len(ins) {
			return ins[i]
		}
		return ""
	}
	out := outs[0]
	switch op := n.GetOpType(); op {
	case "Conv", "ConvTranspose", "MaxPool", "AveragePool":
		if len(x) != 4 {
			return
		}
		var w []int64
		if op == "Conv" || op == "ConvTranspose" {
			var ok bool
			if w, ok = im.dims(in(1)); !ok || len(w) != 4 {
				return
			}
		}
		k, err := pair(n, "kernel_shape", 1)
		if w != nil && attr(n, "kernel_shape") == nil {
			k.H, k.W = w[2], w[3]
		}
		st, err2 := pair(n, "strides", 1)
		d, err3 := pair(n, "dilations", 1)
		if err != nil || err2 != nil || err3 != nil || attr(n, "auto_pad") != nil && string(attr(n, "auto_pad").GetS()) != "NOTSET" {
			return
		}
		p := []int64{0, 0, 0, 0}
		if a := attr(n, "pads"); a != nil {
			if p = a.GetInts(); len(p) != 4 {
				return
			}
		}
		ceil := attr(n, "ceil_mode") != nil && attr(n, "ceil_mode").GetI() == 1
		sh := []int64{x[0], x[1], 0, 0}
		kk, ss, dd := [2]int64{k.H, k.W}, [2]int64{st.H, st.W}, [2]int64{d.H, d.W}
		for i := range 2 {
			if op == "ConvTranspose" {
				var op_ int64
				if a := attr(n, "output_padding"); a != nil && len(a.GetInts()) == 2 {
					op_ = a.GetInts()[i]
				}
				sh[2+i] = (x[2+i]-1)*ss[i] - p[i] - p[i+2] + dd[i]*(kk[i]-1) + op_ + 1
			} else {
				sh[2+i] = windowOut(x[2+i], kk[i], ss[i], p[i], p[i+2], dd[i], ceil)
			}
		}
		switch op {
		case "Conv":
			sh[1] = w[0]
		case "ConvTranspose":
			g := int64(1)
			if a := attr(n, "group"); a != nil {
				g = a.GetI()
			}
			sh[1] = w[1] * g
		}
		set(out, sh)
	case "GlobalAveragePool", "GlobalMaxPool":
		if len(x) == 4 {
			set(out, []int64{x[0], x[1], 1, 1})
		}
	case "ReduceMean", "ReduceMax", "ReduceSum":
		axes := attr(n, "axes").GetInts()
		if axes == nil && in(1) != "" {
			axes, _ = im.ints(in(1))
		}
		keep := attr(n, "keepdims") == nil || attr(n, "keepdims").GetI() != 0
		var sh []int64
		for i, v := range x {
			red := len(axes) == 0
			for _, a := range axes {
				if j, ok := axisOf(a, int64(len(x))); ok && j == i {
					red = true
				}
			}
			switch {
			case !red:
				sh = append(sh, v)
			case keep:
				sh = append(sh, 1)
			}
		}
		set(out, sh)
	case "Flatten":
		ax := int64(1)
		if a := attr(n, "axis"); a != nil {
			ax = a.GetI()
		}
		i, ok := axisOf(ax, int64(len(x)))
		if !ok && ax != int64(len(x)) {
			return
		}
		if ax == int64(len(x)) {
			i = len(x)
		}
		a, b := int64(1), int64(1)
		for j, v := range x {
			if j < i {
				a *= v
			} else {
				b *= v
			}
		}
		set(out, []int64{a, b})
	case "Reshape":
		v, ok := im.intsOf(in(1))
		if !ok || len(v) == 0 || len(v) > 8 {
			return
		}
		total := int64(1)
		for _, d := range x {
			total *= d
		}
		sh := slices.Clone(v)
		if sh[0] == -1 && slices.Index(sh[1:], -1) >= 0 {
			sh[0] = x[0] // the batch, read from a folded Shape
		}
		free, rest := -1, int64(1)
		for i, d := range sh {
			switch {
			case d == 0 && i < len(x):
				sh[i] = x[i]
			case d == -1 && free < 0:
				free = i
				continue
			case d < 1:
				return
			}
			rest *= sh[i]
			if rest > maxDim*maxDim {
				return
			}
		}
		if free >= 0 {
			if rest == 0 || total%rest != 0 {
				return
			}
			sh[free] = total / rest
		} else if rest != total {
			return
		}
		set(out, sh)
	case "Transpose":
		perm := attr(n, "perm").GetInts()
		if len(perm) != len(x) {
			return
		}
		sh := make([]int64, len(x))
		for i, p := range perm {
			if p < 0 || p >= int64(len(x)) {
				return
			}
			sh[i] = x[p]
		}
		set(out, sh)
	case "Gemm":
		w, ok := im.dims(in(1))
		if !ok || len(w) != 2 || len(x) != 2 {
			return
		}
		u := w[1]
		if a := attr(n, "transB"); a != nil && a.GetI() == 1 {
			u = w[0]
		}
		set(out, []int64{x[0], u})
	case "MatMul":
		w, ok := im.dims(in(1))
		if !ok || len(w) != 2 || x[len(x)-1] != w[0] {
			return
		}
		sh := slices.Clone(x)
		sh[len(sh)-1] = w[1]
		set(out, sh)
	case "Concat":
		a := attr(n, "axis")
		if a == nil {
			return
		}
		i, ok := axisOf(a.GetI(), int64(len(x)))
		if !ok {
			return
		}
		sh := slices.Clone(x)
		sh[i] = 0
		for _, t := range ins {
			s := shapeOf(t)
			if len(s) != len(x) {
				return
			}
			sh[i] += s[i]
		}
		set(out, sh)
	case "Slice":
		sh := slices.Clone(x)
		st, ok1 := im.intsOf(in(1))
		en, ok2 := im.intsOf(in(2))
		if !ok1 || !ok2 || len(st) != len(en) {
			return
		}
		axes := make([]int64, len(st))
		for i := range axes {
			axes[i] = int64(i)
		}
		if in(3) != "" {
			var ok bool
			if axes, ok = im.intsOf(in(3)); !ok || len(axes) != len(st) {
				return
			}
		}
		if in(4) != "" {
			if steps, ok := im.intsOf(in(4)); !ok || slices.ContainsFunc(steps, func(s int64) bool { return s != 1 }) {
				return
			}
		}
		for i, a := range axes {
			j, ok := axisOf(a, int64(len(x)))
			if !ok {
				return
			}
			lo, hi := clampIndex(st[i], x[j]), clampIndex(en[i], x[j])
			sh[j] = max(hi-lo, 0)
		}
		set(out, sh)
	case "Split":
		ax := int64(0)
		if a := attr(n, "axis"); a != nil {
			ax = a.GetI()
		}
		i, ok := axisOf(ax, int64(len(x)))
		if !ok {
			return
		}
		parts := attr(n, "split").GetInts()
		if in(1) != "" {
			parts, _ = im.intsOf(in(1))
		}
		if parts == nil {
			if x[i]%int64(len(outs)) != 0 {
				return
			}
			for range outs {
				parts = append(parts, x[i]/int64(len(outs)))
			}
		}
		if len(parts) != len(outs) {
			return
		}
		for k, o := range outs {
			sh := slices.Clone(x)
			sh[i] = parts[k]
			set(o, sh)
		}
	case "DepthToSpace", "SpaceToDepth":
		r := attr(n, "blocksize").GetI()
		if len(x) != 4 || r < 1 || r > maxDim {
			return
		}
		if op == "DepthToSpace" {
			if x[1]%(r*r) != 0 {
				return
			}
			set(out, []int64{x[0], x[1] / (r * r), x[2] * r, x[3] * r})
			return
		}
		if x[2]%r != 0 || x[3]%r != 0 {
			return
		}
		set(out, []int64{x[0], x[1] * r * r, x[2] / r, x[3] / r})
	case "Pad":
		p := attr(n, "pads").GetInts()
		if p == nil {
			p, _ = im.ints(in(1))
		}
		if len(p) != 2*len(x) {
			return
		}
		sh := slices.Clone(x)
		for i := range sh {
			sh[i] += p[i] + p[i+len(x)]
		}
		set(out, sh)
	case "Resize", "Upsample":
		s, ok := im.floats(in(len(ins) - 1))
		if op == "Resize" {
			s, ok = im.floats(in(2))
		}
		if !ok || len(s) != len(x) {
			return
		}
		sh := slices.Clone(x)
		for i := range sh {
			if s[i] < 0 || s[i] > maxDim {
				return
			}
			sh[i] = int64(float64(x[i]) * s[i])
		}
		set(out, sh)
	case "Add", "Sub", "Mul", "Div", "Pow", "Max", "Min", "Where", "Equal":
		sh := slices.Clone(x)
		for _, t := range ins[1:] {
			s := shapeOf(t)
			if s == nil {
				if d, ok := im.dims(t); ok {
					s = d
				} else {
					continue
				}
			}
			sh = broadcast(sh, s)
			if sh == nil {
				return
			}
		}
		set(out, sh)
	case "BatchNormalization", "InstanceNormalization", "LayerNormalization", "Relu", "Sigmoid", "Tanh", "HardSwish",
		"HardSigmoid", "Gelu", "LeakyRelu", "Clip", "Dropout", "Erf", "Sqrt", "Identity", "Softmax", "Neg", "Abs", "Exp", "Elu", "Selu",
		"Softplus", "PRelu", "Mish":
		set(out, slices.Clone(x))
	}
}

// clampIndex clamps a Slice bound to 0..d, counting a negative one from
// the end (the ONNX operator's rule for step 1).
func clampIndex(v, d int64) int64 {
	if v < 0 {
		v += d
	}
	return min(max(v, 0), d)
}

// broadcast is the multidirectional broadcast of two shapes, or nil.
func broadcast(a, b []int64) []int64 {
	if len(b) > len(a) {
		a, b = b, a
	}
	out := slices.Clone(a)
	off := len(a) - len(b)
	for i, v := range b {
		switch w := out[off+i]; {
		case w == v || v == 1:
		case w == 1:
			out[off+i] = v
		default:
			return nil
		}
	}
	return out
}
