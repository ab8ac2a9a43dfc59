// Package onnximport reads an ONNX model (the open exchange format
// torch.onnx.export writes) into a stack written with the stack file's
// own constructs: a residual addition becomes a residual block, parallel
// paths joined along the channels a fork, a squeeze-and-excitation
// product a gate, a unit whose output joins its input a block with dense
// links, and consecutive identical units one block with a repeat count.
// It is pure: it takes the file's bytes and returns the stack, with notes
// on what it found.
//
// A node or pattern the stack file cannot express stops the import with
// an error naming the node; the layers read before it come back with the
// error, so a caller may keep that part. Every import that succeeds is
// checked: the stack must evaluate without an error and hold exactly the
// graph's parameters.
package onnximport

import (
	"errors"
	"fmt"
	"slices"

	"google.golang.org/protobuf/proto"

	"stackfit/engine/onnximport/onnxpb"

	"stackfit/engine"
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
//
// The weights' values are not read: the graph is decoded with a schema
// that skips them (see decodeShapes), and only where a layer needs a
// value held in an initializer (a clip's bounds, say) is the whole model
// decoded again.
func Import(data []byte, name string) (*engine.Stack, *Result, error) {
	if len(data) > MaxFileBytes {
		return nil, nil, fmt.Errorf("%w: the file is %d bytes; at most %d (512 MiB) are read", ErrImport, len(data), MaxFileBytes)
	}
	m, consts, err := decode(data, false)
	if err != nil {
		return nil, nil, err
	}
	im := newImporter(true)
	s, res, err := im.model(m, consts, name)
	if !im.missing {
		return s, res, err
	}
	if m, consts, err = decode(data, true); err != nil {
		return nil, nil, err
	}
	return newImporter(false).model(m, consts, name)
}

// importer holds the import's state.
type importer struct {
	res    *Result
	consts map[string]*onnxpb.Tensor // initializers, weight inputs and folded constants
	// values are the int64 values of folded shape subgraphs (Shape,
	// Gather, Unsqueeze, Concat of constants); −1 stands for the batch.
	values map[string][]int64
	// initial marks the initializers and the weight inputs (the graph's
	// parameters and buffers, as opposed to constants the graph computes).
	initial   map[string]bool
	shapeOnly bool // the initializers were decoded without their values
	missing   bool // a value was wanted that shapeOnly left out
	// opset is the model's ONNX operator set (its default domain's).
	opset int64
	// unsqueezed maps the output of a folded Unsqueeze of a weight to
	// that weight and the output's dimensions (a PReLU slope exported
	// without constant folding: Unsqueeze(weight [C], axes 1, 2)).
	unsqueezed map[string]weightView
}

// weightView is a weight seen through a folded Unsqueeze.
type weightView struct {
	weight string
	dims   []int64
}

func newImporter(shapeOnly bool) *importer {
	return &importer{consts: map[string]*onnxpb.Tensor{}, values: map[string][]int64{}, initial: map[string]bool{}, shapeOnly: shapeOnly,
		unsqueezed: map[string]weightView{}}
}

// model imports a decoded model.
func (im *importer) model(m *onnxpb.Model, consts map[string]*onnxpb.Tensor, name string) (*engine.Stack, *Result, error) {
	g := m.GetGraph()
	if g == nil || len(g.GetNode()) == 0 {
		return nil, nil, fmt.Errorf("%w: the model has no graph or no nodes", ErrImport)
	}
	for _, op := range m.GetOpsetImport() {
		if (op.GetDomain() == "" || op.GetDomain() == "ai.onnx") && (op.GetVersion() < 7 || op.GetVersion() > 21) {
			return nil, nil, fmt.Errorf("%w: opset %d; opsets 7 to 21 are read (torch.onnx.export writes 13 to 17)", ErrImport, op.GetVersion())
		}
		if op.GetDomain() == "" || op.GetDomain() == "ai.onnx" {
			im.opset = op.GetVersion()
		}
	}
	im.res = &Result{Nodes: len(g.GetNode())}
	for name, t := range consts {
		im.consts[name] = t
		im.initial[name] = true
	}
	in, x, err := im.input(g)
	if err != nil {
		return nil, nil, err
	}
	gr, err := im.graph(g, x)
	if err != nil {
		return nil, nil, err
	}
	b := &builder{im: im, g: gr, itemOf: map[string]*item{}, names: map[string]bool{}}
	items, _, err := b.seq(x, -1, len(gr.nodes), 0)
	if im.missing {
		return nil, nil, err
	}
	s := &engine.Stack{Name: name, Input: in}
	if err != nil {
		s.Layers = b.finish(s, items)
		normEps(s)
		if werr := writable(s); werr != nil {
			s.Layers = nil // the layers before the stop are past a limit: none are kept
		}
		return s, im.res, err
	}
	for i, seen := range b.visited {
		if !seen {
			return s, im.res, b.stop(i, "the walk from the input %q never reaches it: a graph with more than one input or output is not a stack", x)
		}
	}
	s.Layers = b.finish(s, items)
	normEps(s)
	im.res.Read = im.res.Nodes
	if err := writable(s); err != nil {
		return nil, nil, err
	}
	if err := b.verify(s); err != nil {
		return nil, nil, err
	}
	if b.convBias > 0 && !b.sawNorm {
		im.res.Notes = append(im.res.Notes, "no batch norm in the graph and every convolution has a bias: an eval-mode export may have folded the batch norms into the convolutions, and the counts follow the exported graph; export with training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False to keep them")
	}
	return s, im.res, nil
}

// input finds the graph's data input (its first input that is not an
// initializer) and its shape, N×C×H×W. The other inputs that are not
// initializers are the weights of a model exported without them
// (export_params=False): they are read as weights of the shapes they
// declare.
func (im *importer) input(g *onnxpb.Graph) (engine.Shape, string, error) {
	var in engine.Shape
	x := ""
	for _, v := range g.GetInput() {
		if _, ok := im.consts[v.GetName()]; ok {
			continue
		}
		t := v.GetType().GetTensorType()
		dims := t.GetShape().GetDim()
		if x != "" {
			w := &onnxpb.Tensor{Name: v.Name, ElemType: proto.Int32(t.GetElemType())}
			for _, d := range dims {
				if d.GetSize() < 1 {
					w = nil
					break
				}
				w.Dims = append(w.Dims, d.GetSize())
			}
			if w != nil {
				im.consts[w.GetName()], im.initial[w.GetName()] = w, true
			}
			continue
		}
		if len(dims) != 4 {
			return in, "", fmt.Errorf("%w: input %q has %d dimensions; a stack takes N×C×H×W", ErrImport, v.GetName(), len(dims))
		}
		var sh [3]int64
		for i := 1; i < 4; i++ {
			d := dims[i].GetSize()
			if d < 1 || d > engine.MaxSpatial*16 {
				return in, "", fmt.Errorf("%w: input %q: dimension %d is %q; export with a fixed input size", ErrImport, v.GetName(), i, dims[i].String())
			}
			sh[i-1] = d
		}
		x, in = v.GetName(), engine.Shape{C: sh[0], H: sh[1], W: sh[2]}
	}
	if x == "" {
		return in, "", fmt.Errorf("%w: the graph has no data input", ErrImport)
	}
	return in, x, nil
}

// note adds a note for the user once, however many nodes give rise to it.
func (im *importer) note(s string) {
	if !slices.Contains(im.res.Notes, s) {
		im.res.Notes = append(im.res.Notes, s)
	}
}
