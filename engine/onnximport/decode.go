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

// decode reads a model. Its initializers are read as onnxpb.Weight,
// which declares no data fields, so a model's weights are skipped, not
// copied, and the constants map holds their names, types and shapes. With
// values, the file is decoded a second time for the initializers' values
// (onnxpb.ValuesModel), which copies the weights' bytes once; the values
// of tensors up to maxValues elements are kept (shape vectors, scalars,
// pads, clip bounds) and the rest dropped at once. An import asks for
// values only when a layer needs one that the first decoding left out.
func decode(data []byte, values bool) (*onnxpb.Model, map[string]*onnxpb.Tensor, error) {
	opts := proto.UnmarshalOptions{DiscardUnknown: true}
	var m onnxpb.Model
	if err := opts.Unmarshal(data, &m); err != nil {
		return nil, nil, fmt.Errorf("%w: not an ONNX model (%v)", ErrImport, err)
	}
	consts := map[string]*onnxpb.Tensor{}
	for _, w := range m.GetGraph().GetInitializer() {
		consts[w.GetName()] = &onnxpb.Tensor{Name: w.Name, Dims: w.GetDims(), ElemType: w.ElemType, Int64Data: w.GetInt64Data(), Location: w.Location}
	}
	if !values {
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

// maxValues bounds the initializers whose values are kept: shape vectors
// and scalars have a few elements; a weight has many.
const maxValues = 4096

// small reports whether a tensor of these dimensions has at most
// maxValues elements.
func small(dims []int64) bool {
	n := int64(1)
	for _, d := range dims {
		if d < 0 || d > maxValues {
			return false
		}
		n *= d
		if n > maxValues {
			return false
		}
	}
	return true
}
