package onnximport

import (
	"errors"
	"strings"
	"testing"

	"stackfit/engine/onnximport/onnxpb"
	"stackfit/engine/stackfile"
)

// TestImportWithinLimits: a model whose values pass the stack file's
// limits (a pad of 2⁶², a reshape to 2⁶² channels, a weight of 16,777,216
// × 65,535² elements) is refused by the import with a named error, never
// turned into a stack the loader would refuse; and whatever an import
// gives, the stack file it saves loads back.
func TestImportWithinLimits(t *testing.T) {
	const huge = int64(1) << 62
	tests := []struct {
		name string
		data []byte
		want string // the refusal names the value
	}{
		{"pad 2^62", modelWith(t, [4]int64{1, 3, 8, 8}, 13, map[string][]int64{"w": {4, 3, 3, 3}},
			[]*onnxpb.Tensor{rawInt64("pads", 0, 0, huge, huge, 0, 0, huge, huge)},
			node("Pad", "/p/Pad", []string{"x", "pads"}, "p"),
			node("Conv", "/c/Conv", []string{"p", "w"}, "y", ints("kernel_shape", 3, 3))), "pads"},
		{"reshape to 2^62 channels", modelWith(t, [4]int64{1, 3, 8, 8}, 13, nil,
			[]*onnxpb.Tensor{rawInt64("shape", 1, huge, 1, 1)},
			node("Reshape", "/r/Reshape", []string{"x", "shape"}, "y")), "16777216"},
		{"weight 16777216×65535×65535", model(t, [4]int64{1, 3, 8, 8}, 13, map[string][]int64{"w": {16777216, 3, 65535, 65535}},
			node("Conv", "/c/Conv", []string{"x", "w"}, "y")), "kernel"},
		{"dense 2^62 units", model(t, [4]int64{1, 3, 1, 1}, 13, map[string][]int64{"fc": {huge, 3}},
			node("Flatten", "f", []string{"x"}, "fl"),
			node("Gemm", "/fc/Gemm", []string{"fl", "fc"}, "y", &onnxpb.Attribute{Name: strp("transB"), Kind: i32p(2), I: i64p(1)})), "weight"},
	}
	for _, tt := range tests {
		s, _, err := Import(tt.data, "limits")
		if err == nil {
			data, serr := stackfile.Save(s)
			_, lerr := stackfile.Load(data)
			t.Errorf("%s: imported (save: %v, load back: %v)", tt.name, serr, lerr)
			continue
		}
		if !errors.Is(err, ErrImport) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: %v", tt.name, err)
		}
		if s != nil {
			if data, err := stackfile.Save(s); err == nil {
				if _, err := stackfile.Load(data); err != nil {
					t.Errorf("%s: the partial stack returned does not load back: %v", tt.name, err)
				}
			}
		}
		t.Logf("%s: %v", tt.name, err)
	}
}

func strp(s string) *string { return &s }
func i32p(v int32) *int32   { return &v }
func i64p(v int64) *int64   { return &v }
