package engine

import (
	"math"
	"strings"
	"testing"
)

func conv(f, k int64) Layer {
	return Layer{Kind: KindConv, Filters: f, Kernel: Square(k)}
}

// TestDiagnostics checks that each problem is found on the right row with
// a message that states the numbers. The limits are PyTorch's documented
// argument rules (kernel no larger than the padded input, groups dividing
// channels, output_padding below stride or dilation, pooling padding at most
// half the window) and common practice for the warnings.
func TestDiagnostics(t *testing.T) {
	withPad := func(l Layer, p int64) Layer { l.Pad.Size = Square(p); return l }
	withStride := func(l Layer, s int64) Layer { l.Stride = Square(s); return l }
	tests := []struct {
		name   string
		in     Shape
		layers []Layer
		code   Code
		row    int
		want   string // substring of the message
	}{
		{"kernel larger than padded input", Shape{3, 4, 4}, []Layer{conv(8, 7)},
			ErrKernelTooLarge, 0, "kernel height spans 7 pixels but the padded input height is only 4"},
		{"padding rescues the kernel", Shape{3, 4, 4}, []Layer{withPad(conv(8, 7), 2), conv(8, 9)},
			ErrKernelTooLarge, 1, "padded input height is only 2"},
		{"channels not divisible by groups", Shape{6, 8, 8}, []Layer{{Kind: KindConv, Filters: 8, Kernel: Square(3), Groups: 4}},
			ErrGroupsChannels, 0, "input channels 6 are not divisible by groups 4"},
		{"filters not divisible by groups", Shape{8, 8, 8}, []Layer{{Kind: KindConv, Filters: 6, Kernel: Square(3), Groups: 4}},
			ErrGroupsFilters, 0, "filters 6 are not divisible by groups 4"},
		{"dense on a spatial map", Shape{3, 8, 8}, []Layer{conv(8, 3), {Kind: KindDense, Filters: 10}},
			ErrDenseSpatial, 1, "spatial map 8×6×6; insert flatten or global-pool"},
		{"reshape count differs", Shape{100, 1, 1}, []Layer{{Kind: KindDense, Filters: 1000}, {Kind: KindReshape, Target: Shape{16, 8, 8}}},
			ErrReshapeCount, 1, "holds 1024 elements but the input holds 1000"},
		{"transposed output not positive", Shape{4, 1, 1}, []Layer{{Kind: KindDeconv, Filters: 4, Kernel: Square(1), Pad: Padding{Size: Square(1)}}},
			ErrOutputSize, 0, "output height would be -1"},
		{"output padding too large", Shape{4, 4, 4}, []Layer{{Kind: KindDeconv, Filters: 4, Kernel: Square(3), Stride: Square(2), OutPad: Square(2)}},
			ErrOutPad, 0, "output padding 2 on the height must be smaller than the stride (2)"},
		{"pool padding over half the window", Shape{4, 8, 8}, []Layer{{Kind: KindPool, Kernel: Square(2), Pad: Padding{Size: Square(2)}}},
			ErrPoolPad, 0, "padding 2 is more than half the window 2"},
		{"group norm groups", Shape{12, 8, 8}, []Layer{{Kind: KindNorm, Norm: NormGroup, NormGroups: 5}},
			ErrNormGroups, 0, "channels 12 are not divisible by norm groups 5"},
		{"instance norm on 1×1", Shape{12, 1, 1}, []Layer{{Kind: KindNorm, Norm: NormInstance}},
			ErrNormSingle, 0, "instance norm over a 1×1 map"},
		{"same padding on transposed", Shape{4, 4, 4}, []Layer{{Kind: KindDeconv, Filters: 4, Kernel: Square(3), Pad: Padding{Mode: PadSame}}},
			ErrSamePad, 0, "not defined for a transposed convolution"},
		{"zero filters", Shape{4, 4, 4}, []Layer{conv(0, 3)},
			ErrValue, 0, "filters is 0; it must be at least 1"},
		{"bad input", Shape{3, 0, 8}, []Layer{conv(8, 3)},
			ErrValue, -1, "input height is 0"},
		{"overflow", Shape{1 << 20, 1 << 20, 1 << 20}, []Layer{conv(1<<20, 1)},
			ErrOverflow, 0, "does not fit in a 64-bit count"},
		{"stride drops a row", Shape{8, 8, 8}, []Layer{withStride(conv(8, 3), 2)},
			WarnStrideDrop, 0, "stride 2 leaves the last 1 input row and column unused ((8 + 2·0 − 3) mod 2 = 1)"},
		{"stride drops a column only", Shape{8, 9, 8}, []Layer{withStride(conv(8, 3), 2)},
			WarnStrideDrop, 0, "stride 2 leaves the last 1 input column unused"},
		{"same padding asymmetric", Shape{8, 8, 8}, []Layer{{Kind: KindConv, Filters: 8, Kernel: Square(2), Pad: Padding{Mode: PadSame}}},
			WarnSameAsym, 0, "needs 1 padding rows and columns, split unevenly (0 before, 1 after)"},
		{"final receptive field smaller than input", Shape{8, 8, 8}, []Layer{withPad(conv(8, 3), 1), withStride(conv(8, 3), 8)},
			WarnFinalRF, 1, "final receptive field 5×5 is smaller than the input 8×8"},
		{"one layer holds most parameters", Shape{8, 4, 4}, []Layer{conv(8, 1), {Kind: KindFlatten}, {Kind: KindDense, Filters: 512}},
			WarnParamShare, 2, "holds 66,048 of the stack's 66,120 parameters (100%)"},
		{"channels not a multiple of 8", Shape{3, 8, 8}, []Layer{withPad(conv(30, 3), 1), withPad(conv(10, 3), 1)},
			WarnChannels8, 0, "filters 30 is not a multiple of 8 (common practice for tensor-core efficiency); try 32"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := Evaluate(&Stack{Input: tt.in, Layers: tt.layers})
			var found *Diagnostic
			for i := range r.Diags {
				if r.Diags[i].Code == tt.code {
					found = &r.Diags[i]
				}
			}
			if found == nil {
				t.Fatalf("no diagnostic %d; got %+v", tt.code, r.Diags)
			}
			if found.Row != tt.row {
				t.Errorf("on row %d, want %d", found.Row, tt.row)
			}
			if msg := found.Message(); !strings.Contains(msg, tt.want) {
				t.Errorf("message %q does not contain %q", msg, tt.want)
			}
			if (found.Severity == SevError) != (tt.code < WarnStrideDrop) {
				t.Errorf("severity %v for code %d", found.Severity, tt.code)
			}
		})
	}
}

// TestUnresolvedAfterError checks that rows after an error are marked
// unresolved while earlier rows keep their numbers.
func TestUnresolvedAfterError(t *testing.T) {
	r := Evaluate(&Stack{Input: Shape{3, 8, 8}, Layers: []Layer{conv(8, 3), conv(8, 9), conv(8, 1), {Kind: KindAct}}})
	want := []Status{StatusOK, StatusError, StatusUnresolved, StatusUnresolved}
	for i, w := range want {
		if r.Rows[i].Status != w {
			t.Errorf("row %d status %v, want %v", i, r.Rows[i].Status, w)
		}
	}
	if r.Totals.Params != r.Rows[0].Params || r.Errors != 1 {
		t.Errorf("totals %+v errors %d", r.Totals, r.Errors)
	}
	if got := r.Describe(r.Diags[0]); !strings.HasPrefix(got, "layer 2 (conv): ") {
		t.Errorf("Describe = %q", got)
	}
}

// TestCheckedArithmetic checks the overflow guards around int64.
func TestCheckedArithmetic(t *testing.T) {
	tests := []struct {
		a, b   int64
		want   int64
		wantOv bool
	}{
		{3, 4, 12, false},
		{math.MaxInt64, 1, math.MaxInt64, false},
		{math.MaxInt64, 2, 0, true},
		{1 << 32, 1 << 31, 0, true},
		{1 << 31, 1 << 31, 1 << 62, false},
		{-1, 2, 0, true},
	}
	for _, tt := range tests {
		var ov bool
		got := mul(&ov, tt.a, tt.b)
		if ov != tt.wantOv || (!ov && got != tt.want) {
			t.Errorf("mul(%d, %d) = %d, %v; want %d, %v", tt.a, tt.b, got, ov, tt.want, tt.wantOv)
		}
	}
	var ov bool
	if add(&ov, math.MaxInt64, 1); !ov {
		t.Error("add(MaxInt64, 1) did not overflow")
	}
}
