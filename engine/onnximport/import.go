// Package onnximport reads an ONNX model (the open exchange format
// torch.onnx.export writes) into a stack: the layers of its graph, in
// order, as the stack file writes them. It is pure: it takes the file's
// bytes and returns the stack, with notes on what it found.
//
// This first version reads chains: each node takes the flow the node
// before it gave. A graph that branches or merges (a residual addition,
// a concatenation, a gate's multiplication) stops the import at that node
// with an error naming it, and the layers before it are returned, so a
// caller may keep the part that was read.
package onnximport

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// MaxFileBytes bounds the model read (512 MiB: a ResNet-152 with its
// weights is about 240 MB).
const MaxFileBytes = 512 << 20

// ErrImport is wrapped by every import error.
var ErrImport = errors.New("cannot import the ONNX model")

// Stopped is the error for a node the import cannot express: the stack
// returned with it holds the layers before the node.
type Stopped struct {
	Node     string // the node's name ("" when it has none)
	Op       string // its operator
	Position int    // 1-based, in the graph's node order
	Why      string
}

func (e *Stopped) Error() string {
	name := e.Node
	if name == "" {
		name = "(unnamed)"
	}
	return fmt.Sprintf("%v: node %d, %q (%s): %s", ErrImport, e.Position, name, e.Op, e.Why)
}

func (e *Stopped) Unwrap() error { return ErrImport }

// Result is what an import gives besides the stack.
type Result struct {
	Notes []string // what the import found or assumed, for the user
	Nodes int      // nodes in the graph
	Read  int      // nodes read into layers or folded (constants, shapes)
}

// Import reads an ONNX model. name names the stack (usually the file's
// base name). On a *Stopped error the stack holds the layers read before
// the node that stopped it; on other errors it is nil.
func Import(data []byte, name string) (*engine.Stack, *Result, error) {
	if len(data) > MaxFileBytes {
		return nil, nil, fmt.Errorf("%w: the file is %d bytes; at most %d (512 MiB) are read", ErrImport, len(data), MaxFileBytes)
	}
	m, consts, err := decode(data)
	if err != nil {
		return nil, nil, err
	}
	g := m.GetGraph()
	if g == nil || len(g.GetNode()) == 0 {
		return nil, nil, fmt.Errorf("%w: the model has no graph or no nodes", ErrImport)
	}
	for _, op := range m.GetOpsetImport() {
		if (op.GetDomain() == "" || op.GetDomain() == "ai.onnx") && (op.GetVersion() < 7 || op.GetVersion() > 21) {
			return nil, nil, fmt.Errorf("%w: opset %d; opsets 7 to 21 are read (torch.onnx.export writes 13 to 17)", ErrImport, op.GetVersion())
		}
	}
	im := &importer{res: &Result{Nodes: len(g.GetNode())}, consts: consts, names: map[string]bool{}, values: map[string][]int64{}}
	s := &engine.Stack{Name: name}
	in, err := im.input(g)
	if err != nil {
		return nil, nil, err
	}
	s.Input = in
	for i, n := range g.GetNode() {
		l, err := im.node(n, i+1)
		if err != nil {
			s.Layers = im.layers
			return s, im.res, err
		}
		if l != nil {
			im.layers = append(im.layers, *l)
		}
		im.res.Read++
	}
	s.Layers = dropNoOps(s, im.layers)
	if im.convBias > 0 && !im.sawNorm {
		im.res.Notes = append(im.res.Notes, "no batch norm in the graph and every convolution has a bias: an eval-mode export may have folded the batch norms into the convolutions, and the counts follow the exported graph; export with training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False to keep them")
	}
	return s, im.res, nil
}

// importer holds the walk's state.
type importer struct {
	res      *Result
	consts   map[string]*onnxpb.Tensor // initializers and folded constants
	flow     string                    // the tensor the next layer reads
	layers   []engine.Layer
	names    map[string]bool
	convBias int
	sawNorm  bool
	pad      engine.Pair // zero padding a Pad node left for the next convolution or pooling
	// values are the int64 values of folded shape subgraphs (Shape,
	// Gather, Unsqueeze, Concat of constants); −1 stands for the batch.
	values map[string][]int64
}

// input finds the graph's one data input (an input that is not an
// initializer) and its shape, N×C×H×W.
func (im *importer) input(g *onnxpb.Graph) (engine.Shape, error) {
	for _, v := range g.GetInput() {
		if _, ok := im.consts[v.GetName()]; ok {
			continue
		}
		t := v.GetType().GetTensorType()
		dims := t.GetShape().GetDim()
		if len(dims) != 4 {
			return engine.Shape{}, fmt.Errorf("%w: input %q has %d dimensions; a stack takes N×C×H×W", ErrImport, v.GetName(), len(dims))
		}
		var sh [3]int64
		for i := 1; i < 4; i++ {
			d := dims[i].GetSize()
			if d < 1 || d > engine.MaxSpatial*16 {
				return engine.Shape{}, fmt.Errorf("%w: input %q: dimension %d is %q; export with a fixed input size", ErrImport, v.GetName(), i, dims[i].String())
			}
			sh[i-1] = d
		}
		im.flow = v.GetName()
		return engine.Shape{C: sh[0], H: sh[1], W: sh[2]}, nil
	}
	return engine.Shape{}, fmt.Errorf("%w: the graph has no data input", ErrImport)
}

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
	if r := t.GetRawData(); len(r) == 4 && t.GetElemType() == int32(elemFloat) {
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
			if idx, ok := im.intsOf(ins[1]); ok && len(idx) == 1 && idx[0] == 0 {
				im.values[out] = []int64{-1}
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
				return
			}
			all = append(all, v...)
		}
		im.values[out] = all
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
	r := t.GetRawData()
	if t.GetElemType() != int32(elemInt64) || len(r)%8 != 0 || len(r) > 64 {
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

// nameFor turns a node name into a layer name by the stack file's rules
// (letters, digits, '_' and '-', starting with a letter), unique.
func (im *importer) nameFor(n *onnxpb.Node) string {
	var b strings.Builder
	for _, r := range n.GetName() {
		switch {
		case r < 128 && (r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9'), r == '_', r == '-':
			b.WriteRune(r)
		case b.Len() > 0:
			b.WriteByte('_')
		}
		if b.Len() >= engine.MaxNameLen-4 {
			break
		}
	}
	s := strings.Trim(b.String(), "_-")
	for len(s) > 0 && !(s[0] >= 'a' && s[0] <= 'z' || s[0] >= 'A' && s[0] <= 'Z') {
		s = s[1:]
	}
	if s == "" {
		return ""
	}
	base := s
	for i := 2; im.names[s]; i++ {
		s = fmt.Sprintf("%s-%d", base, i)
	}
	im.names[s] = true
	return s
}

// constOnly reports whether every input of n is a constant: the node is
// part of a constant or shape-computing subgraph and is folded.
func (im *importer) constOnly(n *onnxpb.Node) bool {
	for _, in := range n.GetInput() {
		if _, ok := im.consts[in]; !ok && in != "" {
			return false
		}
	}
	return true
}

// node reads one node: a layer, nil for a node that only passes the flow
// on or is folded, or an error that stops the import.
func (im *importer) node(n *onnxpb.Node, pos int) (*engine.Layer, error) {
	stop := func(why string, args ...any) error {
		return &Stopped{Node: n.GetName(), Op: n.GetOpType(), Position: pos, Why: fmt.Sprintf(why, args...)}
	}
	op := n.GetOpType()
	if op == "Constant" || op == "Shape" || im.constOnly(n) {
		for _, o := range n.GetOutput() {
			im.consts[o] = &onnxpb.Tensor{} // folded
		}
		if len(n.GetOutput()) == 1 {
			im.fold(n)
		}
		return nil, nil
	}
	ins := n.GetInput()
	if len(ins) == 0 || ins[0] != im.flow {
		return nil, stop("it reads %v, not the output of the layer before it: graphs that branch or merge (residual additions, concatenations, gates) are not imported yet", ins)
	}
	for _, in := range ins[1:] {
		if _, ok := im.consts[in]; !ok && in != "" {
			return nil, stop("its input %q is another computed tensor: graphs that branch or merge are not imported yet", in)
		}
	}
	if len(n.GetOutput()) == 0 {
		return nil, stop("it has no output")
	}
	next := n.GetOutput()[0]
	var l engine.Layer
	switch op {
	case "Conv", "ConvTranspose":
		w, ok := im.dims(ins[min(1, len(ins)-1)])
		if len(ins) < 2 || !ok || len(w) != 4 {
			return nil, stop("its weight is not a constant of 4 dimensions")
		}
		k, err := pair(n, "kernel_shape", w[2])
		if err != nil {
			return nil, stop("%v", err)
		}
		st, err := pair(n, "strides", 1)
		if err != nil {
			return nil, stop("%v", err)
		}
		d, err := pair(n, "dilations", 1)
		if err != nil {
			return nil, stop("%v", err)
		}
		p, err := pads(n)
		if err != nil {
			return nil, stop("%v", err)
		}
		groups := int64(1)
		if a := attr(n, "group"); a != nil {
			groups = a.GetI()
		}
		if groups < 1 {
			return nil, stop("group %d", groups)
		}
		l = engine.Layer{Kind: engine.KindConv, Filters: w[0], Kernel: k, Stride: st, Dilation: d, Pad: p, Groups: groups, NoBias: len(ins) < 3 || ins[2] == ""}
		if op == "ConvTranspose" {
			l.Kind, l.Filters = engine.KindDeconv, w[1]*groups
			if a := attr(n, "output_padding"); a != nil {
				if v := a.GetInts(); len(v) == 2 {
					l.OutPad = engine.Pair{H: v[0], W: v[1]}
				}
			}
		}
		if !l.NoBias {
			im.convBias++
		}
		l.Name = im.nameFor(n)
	case "BatchNormalization":
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormBatch}
		if a := attr(n, "epsilon"); a != nil {
			l.Eps = f32(a.GetF())
		}
		im.sawNorm = true
	case "InstanceNormalization":
		l = engine.Layer{Kind: engine.KindNorm, Norm: engine.NormInstance, Affine: engine.On}
		im.sawNorm = true
	case "Relu":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU}
	case "LeakyRelu":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActLeakyReLU, Slope: 0.01}
		if a := attr(n, "alpha"); a != nil {
			l.Slope = f32(a.GetF())
		}
	case "Sigmoid":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActSigmoid}
	case "Tanh":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActTanh}
	case "HardSigmoid":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActHardSigmoid}
	case "HardSwish":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActHardSwish}
	case "Gelu":
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActGELU}
	case "Clip":
		lo, hi := 0.0, 0.0
		okLo, okHi := false, false
		if len(ins) > 2 {
			lo, okLo = im.scalar(ins[1])
			hi, okHi = im.scalar(ins[2])
		} else if a, b := attr(n, "min"), attr(n, "max"); a != nil && b != nil {
			lo, hi, okLo, okHi = f32(a.GetF()), f32(b.GetF()), true, true
		}
		if !okLo || !okHi || lo != 0 || hi != 6 {
			return nil, stop("only a clip to 0..6 (relu6) is read")
		}
		l = engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU6}
	case "MaxPool", "AveragePool":
		k, err := pair(n, "kernel_shape", 1)
		if err != nil {
			return nil, stop("%v", err)
		}
		st, err := pair(n, "strides", 1)
		if err != nil {
			return nil, stop("%v", err)
		}
		p, err := pads(n)
		if err != nil {
			return nil, stop("%v", err)
		}
		l = engine.Layer{Kind: engine.KindPool, Pool: engine.PoolMax, Kernel: k, Stride: st, Pad: p}
		if op == "AveragePool" {
			l.Pool = engine.PoolAvg
		}
		if a := attr(n, "ceil_mode"); a != nil && a.GetI() == 1 {
			l.Ceil = true
		}
	case "GlobalAveragePool":
		l = engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolAvg}
	case "GlobalMaxPool":
		l = engine.Layer{Kind: engine.KindGlobalPool, Pool: engine.PoolMax}
	case "Flatten":
		l = engine.Layer{Kind: engine.KindFlatten} // to N×features; the stack's flatten gives N×C·H·W×1×1
	case "Reshape":
		v, ok := []int64(nil), false
		if len(ins) > 1 {
			v, ok = im.intsOf(ins[1])
		}
		switch {
		case ok && len(v) == 2 && (v[1] == -1 || v[1] > 0):
			l = engine.Layer{Kind: engine.KindFlatten}
		case ok && len(v) == 4 && v[1] > 0 && v[2] > 0 && v[3] > 0:
			l = engine.Layer{Kind: engine.KindReshape, Target: engine.Shape{C: v[1], H: v[2], W: v[3]}}
		default:
			return nil, stop("its target shape %v is not N×features or N×C×H×W with fixed sizes", v)
		}
	case "Gemm":
		w, ok := im.dims(ins[min(1, len(ins)-1)])
		if len(ins) < 2 || !ok || len(w) != 2 {
			return nil, stop("its weight is not a constant matrix")
		}
		units := w[1]
		if a := attr(n, "transB"); a != nil && a.GetI() == 1 {
			units = w[0]
		}
		l = engine.Layer{Kind: engine.KindDense, Filters: units, NoBias: len(ins) < 3 || ins[2] == ""}
		l.Name = im.nameFor(n)
	case "Dropout":
		l = engine.Layer{Kind: engine.KindDropout, Rate: 0.5}
		if a := attr(n, "ratio"); a != nil {
			l.Rate = f32(a.GetF())
		} else if len(ins) > 1 {
			if r, ok := im.scalar(ins[1]); ok {
				l.Rate = r
			}
		}
	case "Pad":
		var p []int64
		if a := attr(n, "pads"); a != nil {
			p = a.GetInts()
		} else if len(ins) > 1 {
			p, _ = im.ints(ins[1])
		}
		if mode := attr(n, "mode"); mode != nil && string(mode.GetS()) != "constant" {
			return nil, stop("only zero padding is read")
		}
		if len(p) != 8 || p[0] != 0 || p[1] != 0 || p[4] != 0 || p[5] != 0 || p[2] != p[6] || p[3] != p[7] || p[2] < 0 || p[3] < 0 {
			return nil, stop("pads %v: only the same zero padding on both sides of the height and width is read", p)
		}
		im.pad = engine.Pair{H: p[2], W: p[3]}
		im.flow = next
		return nil, nil
	case "Identity", "Unsqueeze", "Squeeze":
		// N×C and N×C×1×1 are the same flow to a stack (a dense layer's
		// output is N×units×1×1).
		im.flow = next
		return nil, nil
	default:
		return nil, stop("the operator is not imported yet")
	}
	if im.pad != (engine.Pair{}) {
		switch {
		case (l.Kind == engine.KindConv || l.Kind == engine.KindPool) && l.Pad.Mode == engine.PadExplicit:
			l.Pad.Size.H += im.pad.H
			l.Pad.Size.W += im.pad.W
			im.pad = engine.Pair{}
		default:
			return nil, stop("a Pad node before it: padding is read only before a convolution or pooling")
		}
	}
	im.flow = next
	l = l.Normalized()
	return &l, nil
}

// dropNoOps leaves out a flatten whose input is already flat (C×1×1): the
// exporter writes one before and after every dense layer, and a person
// would not.
func dropNoOps(s *engine.Stack, ls []engine.Layer) []engine.Layer {
	r := engine.Evaluate(&engine.Stack{Input: s.Input, Layers: ls})
	if r.Errors > 0 || len(r.Rows) != len(ls) {
		return ls
	}
	out := ls[:0:0]
	for i := range ls {
		if row := &r.Rows[i]; ls[i].Kind == engine.KindFlatten && row.In.H == 1 && row.In.W == 1 {
			continue
		}
		out = append(out, ls[i])
	}
	return out
}
