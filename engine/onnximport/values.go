package onnximport

import (
	"fmt"
	"math"
	"strconv"

	"google.golang.org/protobuf/proto"

	"stackfit/engine/onnximport/onnxpb"

	"stackfit/engine"
)

// f32 turns a float32 attribute into the float64 it was written as
// (1e-05, not 9.999999747378752e-06).
func f32(f float32) float64 {
	v, _ := strconv.ParseFloat(strconv.FormatFloat(float64(f), 'g', -1, 32), 64)
	return v
}

// attr returns a node's attribute by name, or nil.
func attr(n *onnxpb.Node, name string) *onnxpb.Attribute {
	for _, a := range n.GetAttribute() {
		if a.GetName() == name {
			return a
		}
	}
	return nil
}

// pair reads a two-value attribute (kernel_shape, strides, dilations),
// def when absent.
func pair(n *onnxpb.Node, name string, def int64) (engine.Pair, error) {
	a := attr(n, name)
	if a == nil {
		return engine.Square(def), nil
	}
	v := a.GetInts()
	if len(v) != 2 || v[0] < 1 || v[1] < 1 || v[0] > engine.MaxSpatial || v[1] > engine.MaxSpatial {
		return engine.Pair{}, fmt.Errorf("%s %v: two positive values are read (2-D layers)", name, v)
	}
	return engine.Pair{H: v[0], W: v[1]}, nil
}

// pads reads symmetric 2-D padding ([top, left, bottom, right]).
func pads(n *onnxpb.Node) (engine.Padding, error) {
	if a := attr(n, "auto_pad"); a != nil {
		switch s := string(a.GetS()); s {
		case "", "NOTSET":
		case "VALID":
			return engine.Padding{Mode: engine.PadValid}, nil
		case "SAME_UPPER":
			return engine.Padding{Mode: engine.PadSame}, nil
		default:
			return engine.Padding{}, fmt.Errorf("auto_pad %s has no stack-file form", s)
		}
	}
	a := attr(n, "pads")
	if a == nil {
		return engine.Padding{}, nil
	}
	p := a.GetInts()
	if len(p) != 4 || p[0] != p[2] || p[1] != p[3] || p[0] < 0 || p[1] < 0 || p[0] > engine.MaxSpatial || p[1] > engine.MaxSpatial {
		return engine.Padding{}, fmt.Errorf("pads %v: only the same padding on both sides of an axis is read", p)
	}
	return engine.Padding{Size: engine.Pair{H: p[0], W: p[1]}}, nil
}

// dims returns the dimensions of a constant input.
func (im *importer) dims(name string) ([]int64, bool) {
	t, ok := im.consts[name]
	if !ok {
		return nil, false
	}
	d := t.GetDims()
	for _, v := range d {
		if v < 0 || v > 1<<31 {
			return nil, false
		}
	}
	return d, true
}

// scalar reads a one-value float constant (Clip's bounds, Dropout's ratio).
func (im *importer) scalar(name string) (float64, bool) {
	t, ok := im.consts[name]
	if !ok {
		return 0, false
	}
	if f := t.GetFloatData(); len(f) == 1 {
		return f32(f[0]), true
	}
	im.needValue(name, t)
	if r := t.GetRawData(); len(r) == 4 && t.GetElemType() == elemFloat {
		b := uint32(r[0]) | uint32(r[1])<<8 | uint32(r[2])<<16 | uint32(r[3])<<24
		return f32(math.Float32frombits(b)), true
	}
	return 0, false
}

// fold works out the int64 value of a folded node where it is one of the
// few a reshape's target is computed with (the batch stays −1).
func (im *importer) fold(n *onnxpb.Node) {
	out := n.GetOutput()[0]
	ins := n.GetInput()
	switch n.GetOpType() {
	case "Constant":
		if t := attr(n, "value").GetT(); t != nil {
			im.consts[out] = t
			if v, ok := im.ints(out); ok {
				im.values[out] = v
			}
		}
	case "Shape":
		im.values[out] = []int64{-1, -1, -1, -1} // only the batch, gathered, is used
	case "Gather":
		if len(ins) == 2 {
			v, ok1 := im.intsOf(ins[0])
			idx, ok2 := im.intsOf(ins[1])
			if ok1 && ok2 && len(idx) == 1 {
				if i, ok := axisOf(idx[0], int64(len(v))); ok {
					im.values[out] = []int64{v[i]}
				}
			}
		}
	case "Add", "Sub", "Mul", "Div":
		// Shape arithmetic (a chunk's bounds: (C + 1) / 2 · k); integer
		// division truncates. The batch (−1) and anything out of range
		// leave the value unknown.
		if len(ins) == 2 {
			if v, ok := arith(n.GetOpType(), im, ins[0], ins[1]); ok {
				im.values[out] = v
			}
		}
	case "Unsqueeze", "Squeeze", "Identity", "Cast":
		if len(ins) > 0 {
			if v, ok := im.intsOf(ins[0]); ok {
				im.values[out] = v
			}
		}
	case "Concat":
		var all []int64
		for _, in := range ins {
			v, ok := im.intsOf(in)
			if !ok {
				im.foldFloats(out, ins) // F.interpolate's scales: [1, 1] and [2, 2] joined
				return
			}
			all = append(all, v...)
		}
		im.values[out] = all
	}
}

// foldFloats makes the concatenation of short float constants ins a
// constant out, where every input is one (floats reads it).
func (im *importer) foldFloats(out string, ins []string) {
	var fs []float32
	for _, in := range ins {
		f, ok := im.floats(in)
		if !ok || len(fs)+len(f) > 16 {
			return
		}
		for _, v := range f {
			fs = append(fs, float32(v))
		}
	}
	if len(fs) > 0 {
		im.consts[out] = &onnxpb.Tensor{FloatData: fs}
	}
}

// intsOf returns a folded int64 value, or an int64 constant.
func (im *importer) intsOf(name string) ([]int64, bool) {
	if v, ok := im.values[name]; ok {
		return v, true
	}
	return im.ints(name)
}

// ints reads an int64 constant (Pad's pads).
func (im *importer) ints(name string) ([]int64, bool) {
	t, ok := im.consts[name]
	if !ok {
		return nil, false
	}
	if v := t.GetInt64Data(); len(v) > 0 {
		return v, true
	}
	im.needValue(name, t)
	r := t.GetRawData()
	if t.GetElemType() != elemInt64 || len(r)%8 != 0 || len(r) > 64 {
		return nil, false
	}
	out := make([]int64, len(r)/8)
	for i := range out {
		var v uint64
		for j := 7; j >= 0; j-- {
			v = v<<8 | uint64(r[8*i+j])
		}
		out[i] = int64(v)
	}
	return out, true
}

// needValue notes that a value was wanted from an initializer the
// shape-only decoding read without its values: the import then runs
// again on the whole model.
func (im *importer) needValue(name string, t *onnxpb.Tensor) {
	if im.shapeOnly && im.initial[name] && len(t.GetRawData()) == 0 {
		im.missing = true
	}
}

// floats reads a short float constant (an upsampling's scales).
func (im *importer) floats(name string) ([]float64, bool) {
	t, ok := im.consts[name]
	if !ok {
		return nil, false
	}
	var out []float64
	if f := t.GetFloatData(); len(f) > 0 {
		for _, v := range f {
			out = append(out, f32(v))
		}
		return out, true
	}
	im.needValue(name, t)
	r := t.GetRawData()
	if t.GetElemType() != elemFloat || len(r)%4 != 0 || len(r) == 0 || len(r) > 64 {
		return nil, false
	}
	for i := 0; i < len(r); i += 4 {
		b := uint32(r[i]) | uint32(r[i+1])<<8 | uint32(r[i+2])<<16 | uint32(r[i+3])<<24
		out = append(out, f32(math.Float32frombits(b)))
	}
	return out, true
}

// arith evaluates an element-wise operation on two folded int64 values
// of equal length (or one of them a single value), where every value is
// a size (0 ≤ v ≤ maxDim).
func arith(op string, im *importer, a, b string) ([]int64, bool) {
	x, ok1 := im.intsOf(a)
	y, ok2 := im.intsOf(b)
	if !ok1 || !ok2 || len(x) == 0 || len(y) == 0 || len(x) != len(y) && len(x) != 1 && len(y) != 1 {
		return nil, false
	}
	out := make([]int64, max(len(x), len(y)))
	for i := range out {
		p, q := x[min(i, len(x)-1)], y[min(i, len(y)-1)]
		if p < 0 || q < 0 || p > maxDim || q > maxDim {
			return nil, false
		}
		switch op {
		case "Add":
			out[i] = p + q
		case "Sub":
			out[i] = p - q
		case "Mul":
			out[i] = p * q
		case "Div":
			if q == 0 {
				return nil, false
			}
			out[i] = p / q
		}
	}
	return out, true
}

// foldData completes the folding of a node with one input that reads a
// computed tensor's shape or a weight: Shape gives the shape the shape
// pass found (the batch −1), and Transpose of a weight matrix (a linear
// layer's weight as the exporter writes it for MatMul) is that weight,
// its dimensions permuted.
func (im *importer) foldData(n *onnxpb.Node, sh []int64) {
	out, in := n.GetOutput()[0], n.GetInput()[0]
	switch n.GetOpType() {
	case "Shape":
		if sh != nil && attr(n, "start") == nil && attr(n, "end") == nil {
			v := append([]int64{-1}, sh[1:]...)
			im.values[out] = v
		}
	case "Transpose":
		d, ok := im.dims(in)
		perm := attr(n, "perm").GetInts()
		if !ok || !im.initial[in] || len(d) != 2 || perm != nil && (len(perm) != 2 || perm[0] != 1 || perm[1] != 0) {
			return
		}
		t := im.consts[in]
		im.consts[out] = &onnxpb.Tensor{Name: &out, Dims: []int64{d[1], d[0]}, ElemType: proto.Int32(t.GetElemType())}
		im.initial[out] = true
	}
}

// unsqueezeWeight records a folded Unsqueeze of a weight (axes as an
// attribute before opset 13, a constant input from it) in im.unsqueezed.
func (im *importer) unsqueezeWeight(n *onnxpb.Node) {
	ins := n.GetInput()
	if n.GetOpType() != "Unsqueeze" || len(ins) == 0 || !im.initial[ins[0]] {
		return
	}
	d, ok := im.dims(ins[0])
	if !ok {
		return
	}
	axes := attr(n, "axes").GetInts()
	if len(ins) > 1 {
		axes, ok = im.intsOf(ins[1])
	}
	rank := int64(len(d) + len(axes))
	if !ok || len(axes) == 0 || rank > 8 {
		return
	}
	out := make([]int64, rank)
	for _, a := range axes {
		i, ok := axisOf(a, rank)
		if !ok || out[i] != 0 {
			return
		}
		out[i] = -1 // an inserted axis
	}
	j := 0
	for i := range out {
		if out[i] == -1 {
			out[i] = 1
			continue
		}
		out[i] = d[j]
		j++
	}
	im.unsqueezed[n.GetOutput()[0]] = weightView{weight: ins[0], dims: out}
}
