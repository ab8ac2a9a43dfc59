package onnximport

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"google.golang.org/protobuf/reflect/protoreflect"

	"stackfit/engine/onnximport/onnxpb"
)

// python is Debian's interpreter, with python3-onnx, python3-torch and
// python3-torchvision.
const python = "/usr/bin/python3"

// referenceEnv turns on the reference suite: the checks that start
// Python. The README's test command leaves them out; .ci/run sets it.
const referenceEnv = "STACKFIT_REFERENCE"

// needReference skips a check that starts Python unless the reference
// suite was asked for, or when Python lacks a module it needs.
func needReference(t *testing.T, modules ...string) {
	t.Helper()
	if os.Getenv(referenceEnv) != "1" {
		t.Skip("reference suite (starts Python): run with " + referenceEnv + "=1, as .ci/run does")
	}
	for _, m := range modules {
		if err := exec.Command(python, "-c", "import "+m).Run(); err != nil {
			t.Skipf("%s cannot import %s: install Debian's python3-%s (.ci/run does)", python, m, m)
		}
	}
}

// officialFor names, for each message of model.proto, the message of the
// ONNX format it reads (several of ours may read one of theirs).
var officialFor = map[protoreflect.FullName]string{
	"stackfit.onnxpb.Model":       "onnx.ModelProto",
	"stackfit.onnxpb.OpsetId":     "onnx.OperatorSetIdProto",
	"stackfit.onnxpb.Graph":       "onnx.GraphProto",
	"stackfit.onnxpb.Node":        "onnx.NodeProto",
	"stackfit.onnxpb.Attribute":   "onnx.AttributeProto",
	"stackfit.onnxpb.Tensor":      "onnx.TensorProto",
	"stackfit.onnxpb.Weight":      "onnx.TensorProto",
	"stackfit.onnxpb.ValueInfo":   "onnx.ValueInfoProto",
	"stackfit.onnxpb.ValueType":   "onnx.TypeProto",
	"stackfit.onnxpb.TensorType":  "onnx.TypeProto.Tensor",
	"stackfit.onnxpb.Shape":       "onnx.TensorShapeProto",
	"stackfit.onnxpb.Dim":         "onnx.TensorShapeProto.Dimension",
	"stackfit.onnxpb.ValuesModel": "onnx.ModelProto",
	"stackfit.onnxpb.ValuesGraph": "onnx.GraphProto",
}

// schemaDump prints, for every message of python3-onnx's compiled schema,
// each field by number: its type code (descriptor.proto's numbering,
// which protoreflect.Kind shares), whether it repeats, the message it
// holds and the oneof it belongs to. The compiled schema is built from
// the onnx.proto the package ships (onnx-ml.proto is the same schema with
// the ML operators' domain; field numbers are shared).
const schemaDump = `import json, onnx
out = {}
def walk(m):
    out[m.full_name] = {str(f.number): {"name": f.name, "type": f.type, "repeated": f.label == 3,
        "message": f.message_type.full_name if f.message_type else "",
        "oneof": f.containing_oneof.name if f.containing_oneof else ""} for f in m.fields}
    for n in m.nested_types: walk(n)
for m in onnx.ModelProto.DESCRIPTOR.file.message_types_by_name.values(): walk(m)
print(json.dumps(out))
`

// TestSchemaMatchesONNX holds every field of model.proto to the ONNX
// format as Debian's python3-onnx compiles it: the same field number, the
// same wire type (an enumeration of theirs may be our int32: both are
// varints), the same repetition, a message field reading the message
// officialFor names, and a oneof member of theirs a oneof member of ours.
func TestSchemaMatchesONNX(t *testing.T) {
	needReference(t, "onnx")
	out, err := exec.Command(python, "-c", schemaDump).Output()
	if err != nil {
		t.Fatalf("the schema dump: %v", err)
	}
	type field struct {
		Name     string
		Type     int
		Repeated bool
		Message  string
		Oneof    string
	}
	var official map[string]map[string]field
	if err := json.Unmarshal(out, &official); err != nil {
		t.Fatal(err)
	}
	msgs := onnxpb.File_model_proto.Messages()
	var all []protoreflect.MessageDescriptor
	for i := 0; i < msgs.Len(); i++ {
		all = append(all, msgs.Get(i))
	}
	if len(all) != len(officialFor) {
		t.Fatalf("model.proto has %d messages; officialFor maps %d", len(all), len(officialFor))
	}
	for _, m := range all {
		theirs, ok := official[officialFor[m.FullName()]]
		if !ok {
			t.Errorf("%s: %q is not a message of python3-onnx's schema", m.FullName(), officialFor[m.FullName()])
			continue
		}
		fs := m.Fields()
		oneofs := map[string]int{}
		for i := 0; i < fs.Len(); i++ {
			f := fs.Get(i)
			o, ok := theirs[strconv.Itoa(int(f.Number()))]
			where := string(m.FullName()) + "." + string(f.Name())
			if !ok {
				t.Errorf("%s = %d: %s has no field %d", where, f.Number(), officialFor[m.FullName()], f.Number())
				continue
			}
			kind := int(f.Kind())
			if kind != o.Type && !(o.Type == int(protoreflect.EnumKind) && f.Kind() == protoreflect.Int32Kind) {
				t.Errorf("%s = %d: type %v; theirs (%s) is type %d", where, f.Number(), f.Kind(), o.Name, o.Type)
			}
			if f.IsList() != o.Repeated {
				t.Errorf("%s = %d: repeated %v; theirs (%s) %v", where, f.Number(), f.IsList(), o.Name, o.Repeated)
			}
			if f.Message() != nil && officialFor[f.Message().FullName()] != o.Message {
				t.Errorf("%s = %d: holds %s (read as %s); theirs (%s) holds %s", where, f.Number(), f.Message().FullName(), officialFor[f.Message().FullName()], o.Name, o.Message)
			}
			// A oneof of ours must be one of theirs. A member of theirs may
			// be a plain field of ours when we declare no other member of
			// that oneof: on the wire the two read alike.
			switch {
			case f.ContainingOneof() != nil && o.Oneof == "":
				t.Errorf("%s = %d: in a oneof; theirs (%s) is not", where, f.Number(), o.Name)
			case f.ContainingOneof() == nil && o.Oneof != "":
				oneofs[o.Oneof]++
				if oneofs[o.Oneof] > 1 {
					t.Errorf("%s = %d: a second plain field from their oneof %q", where, f.Number(), o.Oneof)
				}
			}
			t.Logf("%s = %d ↔ %s.%s = %d", where, f.Number(), officialFor[m.FullName()], o.Name, f.Number())
		}
	}
}

// exportNets writes ONNX models with Debian's PyTorch: torchvision's
// ResNet-18 and MobileNetV2 (no weights downloaded: weights=None), each
// with constant folding off (opset 13, the batch norms kept) and on
// (opset 17, eval mode: shape vectors and clip bounds become
// initializers), and dumps what python3-onnx reads of each: nodes with
// their attributes, initializers' shapes and the small ones' values, the
// graph's inputs and outputs, and the operator sets.
const exportNets = `import json, sys, torch, torchvision, onnx
from onnx import numpy_helper
out = sys.argv[1]
res = {}
for name, ctor in (("resnet18", torchvision.models.resnet18), ("mobilenet_v2", torchvision.models.mobilenet_v2)):
    for folded in (False, True):
        m = ctor(weights=None)
        key = name + ("-folded" if folded else "")
        path = out + "/" + key + ".onnx"
        if folded:
            m.eval()
            torch.onnx.export(m, torch.zeros(1, 3, 64, 64), path, do_constant_folding=True, opset_version=17)
        else:
            m.train()
            torch.onnx.export(m, torch.zeros(2, 3, 64, 64), path, training=torch.onnx.TrainingMode.PRESERVE, do_constant_folding=False, opset_version=13)
        g = onnx.load(path)
        def attr(a):
            return {"name": a.name, "type": a.type, "f": a.f, "i": a.i, "s": a.s.decode("latin-1"),
                    "floats": list(a.floats), "ints": list(a.ints), "t_dims": list(a.t.dims) if a.HasField("t") else None}
        small = {}
        for t in g.graph.initializer:
            v = numpy_helper.to_array(t)
            if v.size <= 4096:  # maxValues
                small[t.name] = [float(x) for x in v.flatten()]
        res[key] = {
            "opsets": [[o.domain, o.version] for o in g.opset_import],
            "nodes": [{"name": n.name, "op": n.op_type, "in": list(n.input), "out": list(n.output),
                       "attrs": [attr(a) for a in n.attribute]} for n in g.graph.node],
            "inits": [{"name": t.name, "dims": list(t.dims), "type": t.data_type} for t in g.graph.initializer],
            "small": small,
            "inputs": [[v.name, [d.dim_value if d.HasField("dim_value") else d.dim_param for d in v.type.tensor_type.shape.dim]] for v in g.graph.input],
            "outputs": [[v.name, [d.dim_value if d.HasField("dim_value") else d.dim_param for d in v.type.tensor_type.shape.dim]] for v in g.graph.output],
        }
json.dump(res, open(out + "/read.json", "w"))
`

// TestDecodeMatchesONNX decodes models exported by Debian's PyTorch with
// stackfit's binding and compares what it reads with what python3-onnx
// reads of the same files: every node's name, operator, inputs, outputs
// and attributes (name, type code and value), every initializer's name,
// type and dimensions, the small initializers' values (the second
// decoding), the graph's inputs and outputs with their dimensions, and
// the operator sets.
func TestDecodeMatchesONNX(t *testing.T) {
	needReference(t, "onnx", "torch", "torchvision")
	dir := t.TempDir()
	if b, err := exec.Command(python, "-c", exportNets, dir).CombinedOutput(); err != nil {
		t.Fatalf("export: %v\n%s", err, b)
	}
	type attrRead struct {
		Name   string
		Type   int32
		F      float32
		I      int64
		S      string
		Floats []float32
		Ints   []int64
		TDims  []int64 `json:"t_dims"`
	}
	type nodeRead struct {
		Name, Op string
		In, Out  []string
		Attrs    []attrRead
	}
	type initRead struct {
		Name string
		Dims []int64
		Type int32
	}
	type modelRead struct {
		Opsets  [][2]any
		Nodes   []nodeRead
		Inits   []initRead
		Small   map[string][]float64
		Inputs  [][2]any
		Outputs [][2]any
	}
	raw, err := os.ReadFile(filepath.Join(dir, "read.json"))
	if err != nil {
		t.Fatal(err)
	}
	var read map[string]modelRead
	if err := json.Unmarshal(raw, &read); err != nil {
		t.Fatal(err)
	}
	if len(read) != 4 {
		t.Fatalf("%d models exported", len(read))
	}
	for key, want := range read {
		t.Run(key, func(t *testing.T) {
			data, err := os.ReadFile(filepath.Join(dir, key+".onnx"))
			if err != nil {
				t.Fatal(err)
			}
			m, consts, err := decode(data, true)
			if err != nil {
				t.Fatal(err)
			}
			g := m.GetGraph()
			got := modelRead{Small: map[string][]float64{}}
			for _, o := range m.GetOpsetImport() {
				got.Opsets = append(got.Opsets, [2]any{o.GetDomain(), float64(o.GetVersion())})
			}
			for _, n := range g.GetNode() {
				nr := nodeRead{Name: n.GetName(), Op: n.GetOpType(), In: list(n.GetInput()), Out: list(n.GetOutput()), Attrs: []attrRead{}}
				for _, a := range n.GetAttribute() {
					ar := attrRead{Name: a.GetName(), Type: a.GetKind(), F: a.GetF(), I: a.GetI(), S: latin1(a.GetS()), Floats: list(a.GetFloats()), Ints: list(a.GetInts())}
					if a.T != nil {
						ar.TDims = a.GetT().GetDims()
						if ar.TDims == nil {
							ar.TDims = []int64{}
						}
					}
					nr.Attrs = append(nr.Attrs, ar)
				}
				got.Nodes = append(got.Nodes, nr)
			}
			for _, w := range g.GetInitializer() {
				got.Inits = append(got.Inits, initRead{Name: w.GetName(), Dims: w.GetDims(), Type: w.GetElemType()})
				if small(w.GetDims()) {
					v, ok := values(consts[w.GetName()])
					if !ok {
						t.Errorf("initializer %q: its values were not read", w.GetName())
					}
					got.Small[w.GetName()] = v
				}
			}
			for _, v := range g.GetInput() {
				got.Inputs = append(got.Inputs, [2]any{v.GetName(), dimsOf(v)})
			}
			for _, v := range g.GetOutput() {
				got.Outputs = append(got.Outputs, [2]any{v.GetName(), dimsOf(v)})
			}
			// Compare through JSON, as Python wrote it.
			wantJSON, _ := json.Marshal(want)
			var norm modelRead
			gotJSON, _ := json.Marshal(got)
			if err := json.Unmarshal(gotJSON, &norm); err != nil {
				t.Fatal(err)
			}
			gotJSON, _ = json.Marshal(norm)
			if !bytes.Equal(gotJSON, wantJSON) {
				t.Errorf("stackfit's binding and python3-onnx read differently:\n ours   %.2000s\n theirs %.2000s", gotJSON, wantJSON)
			}
			t.Logf("%d nodes, %d initializers (%d small, values read), %d inputs: identical", len(got.Nodes), len(got.Inits), len(got.Small), len(got.Inputs))
		})
	}
}

// list gives an empty list, not nil, as Python writes one.
func list[T any](v []T) []T {
	if v == nil {
		return []T{}
	}
	return v
}

// latin1 turns bytes into the string Python's latin-1 decoding gives.
func latin1(b []byte) string {
	r := make([]rune, len(b))
	for i, c := range b {
		r[i] = rune(c)
	}
	return string(r)
}

// dimsOf lists a value's dimensions as python3-onnx gives them: a size,
// or the symbol's name.
func dimsOf(v *onnxpb.ValueInfo) []any {
	out := []any{}
	for _, d := range v.GetType().GetTensorType().GetShape().GetDim() {
		if s, ok := d.GetValue().(*onnxpb.Dim_Symbol); ok {
			out = append(out, s.Symbol)
			continue
		}
		out = append(out, float64(d.GetSize()))
	}
	return out
}

// values reads a small tensor's values as float64s, whichever field holds
// them.
func values(t *onnxpb.Tensor) ([]float64, bool) {
	if t == nil {
		return nil, false
	}
	n := 1
	for _, d := range t.GetDims() {
		n *= int(d)
	}
	var out []float64
	switch r := t.GetRawData(); {
	case len(t.GetFloatData()) > 0:
		for _, f := range t.GetFloatData() {
			out = append(out, float64(f))
		}
	case len(t.GetInt64Data()) > 0:
		for _, v := range t.GetInt64Data() {
			out = append(out, float64(v))
		}
	case t.GetElemType() == elemInt64 && len(r) == 8*n:
		for i := 0; i < n; i++ {
			out = append(out, float64(int64(binary.LittleEndian.Uint64(r[8*i:]))))
		}
	case t.GetElemType() == elemFloat && len(r) == 4*n:
		for i := 0; i < n; i++ {
			out = append(out, float64(math.Float32frombits(binary.LittleEndian.Uint32(r[4*i:]))))
		}
	case n == 0:
		return []float64{}, true
	default:
		return nil, false
	}
	return out, true
}
