package onnximport

import (
	"fmt"

	"google.golang.org/protobuf/proto"

	"stackfit/engine/onnximport/onnxpb"
)

// Element type codes of the ONNX format (TensorProto.DataType).
const (
	elemFloat int32 = 1
	elemInt64 int32 = 7
)

// locationExternal marks a tensor whose values live in a separate file.
const locationExternal = 1

// smallValues bounds the initializers whose values are read: shape
// vectors (a reshape's target, a pad's widths) and scalars (clip bounds)
// have at most a few elements; a weight has many.
const smallValues = 16

// decode reads a model's structure and the constants an import may need.
// The first decoding reads initializers as onnxpb.Weight, which declares
// no data fields, so a model's weights are skipped, not copied. Only when
// some small initializer keeps its values in raw_data (an export with
// constant folding on stores shape vectors and scalars so) is the file
// decoded a second time for those values; that copies the weights' bytes
// once, and all but the small ones are dropped at once.
func decode(data []byte) (*onnxpb.Model, map[string]*onnxpb.Tensor, error) {
	opts := proto.UnmarshalOptions{DiscardUnknown: true}
	var m onnxpb.Model
	if err := opts.Unmarshal(data, &m); err != nil {
		return nil, nil, fmt.Errorf("%w: not an ONNX model (%v)", ErrImport, err)
	}
	consts := map[string]*onnxpb.Tensor{}
	need := false
	for _, w := range m.GetGraph().GetInitializer() {
		consts[w.GetName()] = &onnxpb.Tensor{Name: w.Name, Dims: w.GetDims(), ElemType: w.ElemType, Int64Data: w.GetInt64Data(), Location: w.Location}
		if len(w.GetInt64Data()) == 0 && w.GetLocation() != locationExternal && small(w.GetDims()) {
			need = true
		}
	}
	if !need {
		return &m, consts, nil
	}
	var v onnxpb.ValuesModel
	if err := opts.Unmarshal(data, &v); err != nil {
		return nil, nil, fmt.Errorf("%w: not an ONNX model (%v)", ErrImport, err)
	}
	for _, t := range v.GetGraph().GetInitializer() {
		c, ok := consts[t.GetName()]
		if !ok || !small(c.GetDims()) {
			continue
		}
		c.RawData, c.FloatData, c.DoubleData, c.Int32Data = t.GetRawData(), t.GetFloatData(), t.GetDoubleData(), t.GetInt32Data()
	}
	return &m, consts, nil
}

// small reports whether a tensor of these dimensions has at most
// smallValues elements.
func small(dims []int64) bool {
	n := int64(1)
	for _, d := range dims {
		if d < 0 || d > smallValues {
			return false
		}
		n *= d
		if n > smallValues {
			return false
		}
	}
	return true
}
