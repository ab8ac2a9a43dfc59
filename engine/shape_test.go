package engine

import "testing"

// single evaluates one layer on a c×h×w input.
func single(in Shape, l Layer) (*Result, Row) {
	r := Evaluate(&Stack{Input: in, Layers: []Layer{l}})
	return r, r.Rows[0]
}

// TestConvArithmetic checks output sizes against the relationships and
// worked examples of Dumoulin & Visin 2016, "A guide to convolution
// arithmetic for deep learning" (i input, k kernel, s stride, p padding).
func TestConvArithmetic(t *testing.T) {
	tests := []struct {
		name             string
		i, k, s, p, d, o int64
	}{
		{"relationship 1: no padding, unit stride", 4, 3, 1, 0, 1, 2},
		{"relationship 2: zero padding, unit stride", 5, 4, 1, 2, 1, 6},
		{"relationship 3: half padding", 5, 3, 1, 1, 1, 5},
		{"relationship 4: full padding", 5, 3, 1, 2, 1, 7},
		{"relationship 5: no padding, stride 2", 5, 3, 2, 0, 1, 2},
		{"relationship 6: padding and stride, odd input", 5, 3, 2, 1, 1, 3},
		{"relationship 6: padding and stride, even input", 6, 3, 2, 1, 1, 3},
		{"relationship 15: dilated", 7, 3, 1, 0, 2, 3},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			l := Layer{Kind: KindConv, Filters: 1, Kernel: Square(tt.k), Stride: Square(tt.s),
				Pad: Padding{Size: Square(tt.p)}, Dilation: Square(tt.d)}
			r, row := single(Shape{1, tt.i, tt.i}, l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out.H != tt.o || row.Out.W != tt.o {
				t.Errorf("out = %d×%d, want %d×%d", row.Out.H, row.Out.W, tt.o, tt.o)
			}
		})
	}
}

// TestPoolArithmetic checks pooling sizes: Dumoulin & Visin 2016,
// relationship 7, and PyTorch's MaxPool2d / AvgPool2d documentation
// (ceil_mode drops a window that would start inside the right padding).
func TestPoolArithmetic(t *testing.T) {
	tests := []struct {
		source     string
		mode       PoolMode
		i, k, s, p int64
		ceil       bool
		o          int64
	}{
		{"Dumoulin & Visin relationship 7: 3×3 pool, stride 1, on 5×5", PoolMax, 5, 3, 1, 0, false, 3},
		{"PyTorch MaxPool2d floor: k3 s2 on 112", PoolMax, 112, 3, 2, 0, false, 55},
		{"PyTorch MaxPool2d ceil: k3 s2 on 112", PoolMax, 112, 3, 2, 0, true, 56},
		{"PyTorch MaxPool2d ceil with padding: k2 s2 p1 on 5", PoolMax, 5, 2, 2, 1, true, 3},
		{"PyTorch AvgPool2d: k2 s2 on 7 (floor)", PoolAvg, 7, 2, 2, 0, false, 3},
		{"PyTorch AvgPool2d ceil: k2 s2 on 7", PoolAvg, 7, 2, 2, 0, true, 4},
		{"PyTorch MaxPool2d ceil: window overhangs a 1×1 map (⌊(1 − 2 + 1)/2⌋ + 1 = 1)", PoolMax, 1, 2, 2, 0, true, 1},
		{"PyTorch AvgPool2d ceil: k3 on 2 (⌊(2 − 3 + 2)/3⌋ + 1 = 1)", PoolAvg, 2, 3, 3, 0, true, 1},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			l := Layer{Kind: KindPool, Pool: tt.mode, Kernel: Square(tt.k), Stride: Square(tt.s), Pad: Padding{Size: Square(tt.p)}, Ceil: tt.ceil}
			r, row := single(Shape{8, tt.i, tt.i}, l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != (Shape{8, tt.o, tt.o}) {
				t.Errorf("out = %v, want 8×%d×%d", row.Out, tt.o, tt.o)
			}
		})
	}
}

// TestTransposedArithmetic checks transposed convolutions: Dumoulin & Visin
// 2016 relationships 12–14 and PyTorch's ConvTranspose2d formula
// H_out = (H_in − 1)·s − 2p + d(k − 1) + output_padding + 1.
func TestTransposedArithmetic(t *testing.T) {
	tests := []struct {
		source            string
		i, k, s, p, op, o int64
	}{
		{"Dumoulin & Visin relationship 12: transpose of i=5 k=3 s=2 p=0", 2, 3, 2, 0, 0, 5},
		{"Dumoulin & Visin relationship 13: transpose of i=5 k=3 s=2 p=1", 3, 3, 2, 1, 0, 5},
		{"Dumoulin & Visin relationship 14: transpose of i=6 k=3 s=2 p=1, a=1", 3, 3, 2, 1, 1, 6},
		{"PyTorch ConvTranspose2d: k4 s2 p1 doubles 4 → 8", 4, 4, 2, 1, 0, 8},
		{"PyTorch ConvTranspose2d: k5 s2 p2 op1 doubles 4 → 8 (DCGAN step)", 4, 5, 2, 2, 1, 8},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			l := Layer{Kind: KindDeconv, Filters: 2, Kernel: Square(tt.k), Stride: Square(tt.s), Pad: Padding{Size: Square(tt.p)}, OutPad: Square(tt.op)}
			r, row := single(Shape{4, tt.i, tt.i}, l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != (Shape{2, tt.o, tt.o}) {
				t.Errorf("out = %v, want 2×%d×%d", row.Out, tt.o, tt.o)
			}
		})
	}
}

// TestNonSquare checks that height and width are computed independently
// (PyTorch Conv2d formula applied per axis).
func TestNonSquare(t *testing.T) {
	l := Layer{Kind: KindConv, Filters: 16, Kernel: Pair{3, 5}, Stride: Pair{1, 2}, Pad: Padding{Size: Pair{1, 2}}, Dilation: Pair{2, 1}}
	r, row := single(Shape{3, 20, 31}, l)
	if r.Errors != 0 {
		t.Fatalf("unexpected errors: %v", r.Diags)
	}
	// H: ⌊(20 + 2 − 2·2 − 1)/1⌋ + 1 = 18; W: ⌊(31 + 4 − 4 − 1)/2⌋ + 1 = 16.
	if want := (Shape{16, 18, 16}); row.Out != want {
		t.Errorf("out = %v, want %v", row.Out, want)
	}
	// Parameters: 16·3·3·5 + 16 = 736; MACs: 16·18·16·3·15 = 207,360.
	if row.Params != 736 || row.MACs != 207360 {
		t.Errorf("params %d macs %d, want 736 and 207360", row.Params, row.MACs)
	}
	// Receptive field: dilated kernel spans 5 rows and 5 columns.
	if row.RF != (FPair{5, 5}) || row.Jump != (FPair{1, 2}) {
		t.Errorf("rf %v jump %v", row.RF, row.Jump)
	}
}

// TestSamePadding checks "same" padding: the output is ⌈i/s⌉ and the total
// padding (o − 1)·s + k_eff − i is split with the extra row at the bottom,
// the convention of TensorFlow's "SAME" and of PyTorch's padding='same'
// (common practice; PyTorch's docs allow it for stride 1 only).
func TestSamePadding(t *testing.T) {
	tests := []struct {
		name          string
		i, k, s       int64
		o, before     int64
		after         int64
		asymmetryWarn bool
	}{
		{"odd kernel stride 1", 7, 3, 1, 7, 1, 1, false},
		{"even kernel stride 1", 7, 4, 1, 7, 1, 2, true},
		{"stride 2 even input", 8, 3, 2, 4, 0, 1, true},
		{"stride 2 odd input", 7, 3, 2, 4, 1, 1, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			l := Layer{Kind: KindConv, Filters: 8, Kernel: Square(tt.k), Stride: Square(tt.s), Pad: Padding{Mode: PadSame}}
			r, row := single(Shape{8, tt.i, tt.i}, l)
			before, after := l.ResolvedPadding(row.In)
			if row.Out.H != tt.o || before.H != tt.before || after.H != tt.after {
				t.Errorf("out %d pad %d/%d, want %d pad %d/%d", row.Out.H, before.H, after.H, tt.o, tt.before, tt.after)
			}
			if got := hasCode(r, WarnSameAsym); got != tt.asymmetryWarn {
				t.Errorf("asymmetry warning = %v, want %v", got, tt.asymmetryWarn)
			}
		})
	}
}

func hasCode(r *Result, c Code) bool {
	for _, d := range r.Diags {
		if d.Code == c {
			return true
		}
	}
	return false
}

// TestUpsampleAndAdaptive covers the kinds without a published worked
// example, checked against the definitions in PyTorch's Upsample and
// AdaptiveAvgPool2d documentation.
func TestUpsampleAndAdaptive(t *testing.T) {
	_, row := single(Shape{4, 5, 7}, Layer{Kind: KindUpsample, Factor: Pair{2, 3}, Upsample: UpBilinear})
	if row.Out != (Shape{4, 10, 21}) {
		t.Errorf("upsample out %v", row.Out)
	}
	_, row = single(Shape{4, 13, 13}, Layer{Kind: KindPoolTo, Size: Pair{6, 6}})
	if row.Out != (Shape{4, 6, 6}) {
		t.Errorf("pool-to out %v", row.Out)
	}
	// Widest adaptive window for 13 → 6: windows run ⌊i·13/6⌋ to ⌈(i+1)·13/6⌉, at most 3 wide.
	if row.RF != (FPair{3, 3}) {
		t.Errorf("pool-to rf %v, want 3", row.RF)
	}
	// 5 → 3: windows [0,2), [1,4), [3,5): the middle one is 3 wide.
	if w := adaptiveWindow(5, 3); w != 3 {
		t.Errorf("adaptiveWindow(5, 3) = %d, want 3", w)
	}
	_, row = single(Shape{4, 5, 7}, Layer{Kind: KindGlobalPool})
	if row.Out != (Shape{4, 1, 1}) || row.RF != (FPair{5, 7}) {
		t.Errorf("global pool out %v rf %v", row.Out, row.RF)
	}
}

// TestMobileKinds checks the per-channel scale and the channel shuffle.
// Widths are those of the papers' tables (values from memory): ShuffleNet
// V1 with g = 3 has 240 channels at 28×28 in stage 2 (Zhang et al. 2018,
// Table 1); ShuffleNet V2 1× has 116 there and shuffles 2 groups (Ma et al.
// 2018, Table 5 and Fig. 3); ConvNeXt-T's first stage is 96 wide at 56×56
// with one layer-scale factor per channel starting at 1e-6 (Liu et al.
// 2022). A shuffle and a scale keep the shape (PyTorch's ChannelShuffle
// documentation: output (N, C, H, W) from input (N, C, H, W)).
func TestMobileKinds(t *testing.T) {
	tests := []struct {
		source string
		in     Shape
		l      Layer
		params int64
	}{
		{"Zhang et al. 2018, Table 1: g = 3, stage 2", Shape{240, 28, 28}, Layer{Kind: KindShuffle, Groups: 3}, 0},
		{"Ma et al. 2018, Table 5: 1×, stage 2", Shape{116, 28, 28}, Layer{Kind: KindShuffle, Groups: 2}, 0},
		{"one group is the identity permutation (common practice)", Shape{7, 5, 3}, Layer{Kind: KindShuffle}, 0},
		{"Liu et al. 2022: ConvNeXt-T stage 1, γ = 1e-6", Shape{96, 56, 56}, Layer{Kind: KindScale, ScaleInit: 1e-6}, 96},
		{"the start value changes no count (PyTorch: one nn.Parameter of C values)", Shape{96, 56, 56}, Layer{Kind: KindScale, ScaleInit: 1}, 96},
		{"Howard et al. 2019: hard-swish is element-wise", Shape{16, 112, 112}, Layer{Kind: KindAct, Act: ActHardSwish}, 0},
		{"Howard et al. 2019: hard-sigmoid is element-wise", Shape{72, 1, 1}, Layer{Kind: KindAct, Act: ActHardSigmoid}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r, row := single(tt.in, tt.l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != tt.in || row.Params != tt.params || row.Buffers != 0 || row.MACs != 0 || row.RF != (FPair{1, 1}) {
				t.Errorf("out %v params %d buffers %d MACs %d rf %v; want %v, %d, 0, 0, 1×1", row.Out, row.Params, row.Buffers, row.MACs, row.RF, tt.in, tt.params)
			}
		})
	}
	// ShuffleNet V2's 116 channels do not split into 3 groups (116 = 4·29);
	// PyTorch's reshape to (N, 3, 116/3, H, W) refuses it.
	r, _ := single(Shape{116, 28, 28}, Layer{Kind: KindShuffle, Groups: 3})
	if !hasCode(r, ErrShuffleGroups) || r.Diags[0].Field != "groups" {
		t.Errorf("116 channels in 3 groups: %v, want ErrShuffleGroups on groups", r.Diags)
	} else if msg := r.Diags[0].Message(); msg != "channels 116 are not divisible by shuffle groups 3; pick groups that divide 116, or make the layer before give a multiple of 3" {
		t.Errorf("message %q", msg)
	}
	// The permutation of Zhang et al. 2018, section 3.1 (from memory):
	// reshape the channels to (g, C/g), transpose, flatten.
	r, _ = single(Shape{240, 28, 28}, Layer{Kind: KindShuffle, Groups: 3})
	if got := r.Explain(0); len(got) < 2 || got[0] != "240 channels = 3 groups × 80" || got[1] != "output channel 3·i + j ← input channel 80·j + i (i < 80, j < 3); 0 params, 0 MACs" {
		t.Errorf("explain %q", got)
	}
}

// TestActivationKinds checks mish, softmax and prelu: each keeps the shape
// and adds no buffer, MAC or receptive field (PyTorch's nn.Mish,
// nn.Softmax and nn.PReLU documentation: output (*) of input (*), same
// shape). Mish has no parameters (Misra 2019, eq. 1: x·tanh(softplus(x))),
// nor has the softmax over the channels; prelu learns one slope per
// channel or one shared by all (He et al. 2015, section 2.1: "the number
// of extra parameters is equal to the total number of channels", and the
// channel-shared variant one per layer).
func TestActivationKinds(t *testing.T) {
	tests := []struct {
		source string
		in     Shape
		l      Layer
		params int64
	}{
		{"Misra 2019: Mish is element-wise, no parameters", Shape{64, 56, 56}, Layer{Kind: KindAct, Act: ActMish}, 0},
		{"PyTorch docs, nn.Softmax(dim=1): a softmax over 21 classes at every position", Shape{21, 64, 48}, Layer{Kind: KindAct, Act: ActSoftmax}, 0},
		{"He et al. 2015, section 2.1: channel-wise, one slope per channel", Shape{96, 55, 55}, Layer{Kind: KindAct, Act: ActPReLU, PerChannel: true}, 96},
		{"He et al. 2015, section 2.1: channel-shared, one slope per layer", Shape{96, 55, 55}, Layer{Kind: KindAct, Act: ActPReLU}, 1},
		{"PyTorch docs, nn.PReLU(num_parameters=C, init): the start value changes no count", Shape{16, 3, 5}, Layer{Kind: KindAct, Act: ActPReLU, PerChannel: true, Slope: 0.5}, 16},
		{"He et al. 2015: after a fully connected layer, one slope per unit", Shape{4096, 1, 1}, Layer{Kind: KindAct, Act: ActPReLU, PerChannel: true}, 4096},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r, row := single(tt.in, tt.l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != tt.in || row.Params != tt.params || r.Totals.Params != tt.params || row.Buffers != 0 || row.MACs != 0 || row.RF != (FPair{1, 1}) {
				t.Errorf("out %v params %d (total %d) buffers %d MACs %d rf %v; want %v, %d, 0, 0, 1×1",
					row.Out, row.Params, r.Totals.Params, row.Buffers, row.MACs, row.RF, tt.in, tt.params)
			}
		})
	}
	// A residual block's activation after its addition may be prelu: one
	// shared slope per repeat (the block's after: names no field).
	body := []Layer{{Kind: KindConv, Filters: 8, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true}}
	r := Evaluate(&Stack{Input: Shape{8, 6, 6}, Layers: []Layer{{Kind: KindBlock, Repeat: 2, Residual: true, HasPostAct: true, PostAct: ActPReLU, Body: body}}})
	if want := int64(2 * (8*8*9 + 1)); r.Errors != 0 || r.Totals.Params != want {
		t.Errorf("two repeats then prelu: %d params (%v), want %d", r.Totals.Params, r.Diags, want)
	}
}

// TestRearrangeKinds checks the sub-pixel rearrangements and the channel
// slice: to-space takes C·r² channels at H×W to C at rH×rW and to-channels
// reverses it (PyTorch's nn.PixelShuffle and nn.PixelUnshuffle
// documentation, Shape sections and examples; Shi et al. 2016, section
// 2.2: the last layer of the network gives r²·C channels at the low
// resolution); keep passes the first N channels (Han et al. 2020, the
// Ghost module keeps the first oup of its ⌈oup/s⌉·s joined channels). None
// has parameters, buffers or MACs. The receptive field follows the
// sliding-window rule: to-space reads one input position per output
// (common practice: each output copies one input value), to-channels an
// r×r block with stride r.
func TestRearrangeKinds(t *testing.T) {
	tests := []struct {
		source  string
		in, out Shape
		l       Layer
		rf      FPair
		jump    FPair
	}{
		{"PyTorch docs, nn.PixelShuffle(3): 1×9×4×4 → 1×1×12×12", Shape{9, 4, 4}, Shape{1, 12, 12}, Layer{Kind: KindToSpace, PixelFactor: 3}, FPair{1, 1}, FPair{1.0 / 3, 1.0 / 3}},
		{"Shi et al. 2016: r = 3, one luminance channel, 17×17 low-resolution patches", Shape{9, 17, 17}, Shape{1, 51, 51}, Layer{Kind: KindToSpace, PixelFactor: 3}, FPair{1, 1}, FPair{1.0 / 3, 1.0 / 3}},
		{"Shi et al. 2016: r = 4 on RGB output, non-square input", Shape{48, 10, 7}, Shape{3, 40, 28}, Layer{Kind: KindToSpace, PixelFactor: 4}, FPair{1, 1}, FPair{0.25, 0.25}},
		{"factor 1 is the identity (PyTorch docs: C·1² = C)", Shape{5, 3, 2}, Shape{5, 3, 2}, Layer{Kind: KindToSpace, PixelFactor: 1}, FPair{1, 1}, FPair{1, 1}},
		{"PyTorch docs, nn.PixelUnshuffle(3): 1×1×12×12 → 1×9×4×4", Shape{1, 12, 12}, Shape{9, 4, 4}, Layer{Kind: KindToChannels, PixelFactor: 3}, FPair{3, 3}, FPair{3, 3}},
		{"PyTorch docs: C_out = C_in·r², H_out = H_in ÷ r, non-square", Shape{3, 8, 6}, Shape{12, 4, 3}, Layer{Kind: KindToChannels, PixelFactor: 2}, FPair{2, 2}, FPair{2, 2}},
		{"Han et al. 2020: Ghost module, oup 16 with s = 3: ⌈16/3⌉·3 = 18 joined, 16 kept", Shape{18, 56, 56}, Shape{16, 56, 56}, Layer{Kind: KindKeep, Keep: 16}, FPair{1, 1}, FPair{1, 1}},
		{"Han et al. 2020: oup 16 with s = 2 joins exactly 16 (the slice keeps all)", Shape{16, 112, 112}, Shape{16, 112, 112}, Layer{Kind: KindKeep, Keep: 16}, FPair{1, 1}, FPair{1, 1}},
		{"PyTorch basic indexing: x[:, :1] of 7 channels", Shape{7, 5, 3}, Shape{1, 5, 3}, Layer{Kind: KindKeep, Keep: 1}, FPair{1, 1}, FPair{1, 1}},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r, row := single(tt.in, tt.l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != tt.out || row.Params != 0 || row.Buffers != 0 || row.MACs != 0 || row.RF != tt.rf || row.Jump != tt.jump {
				t.Errorf("out %v params %d buffers %d MACs %d rf %v jump %v; want %v, 0, 0, 0, %v, %v",
					row.Out, row.Params, row.Buffers, row.MACs, row.RF, row.Jump, tt.out, tt.rf, tt.jump)
			}
		})
	}
}

// TestRearrangeErrors checks the refusals and their wording: PyTorch's
// pixel_shuffle refuses channels that are not a multiple of r² and
// pixel_unshuffle a height or width that is not a multiple of r (their
// documented shapes); a slice cannot keep more channels than there are
// (common practice: x[:, :N] with N over C silently keeps C in PyTorch,
// which would hide a mistake, so the stack refuses it).
func TestRearrangeErrors(t *testing.T) {
	tests := []struct {
		name  string
		in    Shape
		l     Layer
		code  Code
		field string
		msg   string
	}{
		{"10 channels, factor 2", Shape{10, 8, 8}, Layer{Kind: KindToSpace, PixelFactor: 2}, ErrToSpaceChannels, "factor",
			"channels 10 are not a multiple of factor² = 4 (factor 2); give the layer before a multiple of 4 channels, e.g. 12, or pick a factor whose square divides 10"},
		{"height 7, factor 2", Shape{3, 7, 8}, Layer{Kind: KindToChannels, PixelFactor: 2}, ErrToChannelsSize, "factor",
			"input height 7 is not a multiple of factor 2; make it a multiple of 2, e.g. 8 (padding or cropping the layers before), or pick a factor that divides 7"},
		{"width 10, factor 3", Shape{3, 9, 10}, Layer{Kind: KindToChannels, PixelFactor: 3}, ErrToChannelsSize, "factor",
			"input width 10 is not a multiple of factor 3; make it a multiple of 3, e.g. 12 (padding or cropping the layers before), or pick a factor that divides 10"},
		{"both 9, factor 2", Shape{3, 9, 9}, Layer{Kind: KindToChannels, PixelFactor: 2}, ErrToChannelsSize, "factor",
			"input height and width 9 is not a multiple of factor 2; make it a multiple of 2, e.g. 10 (padding or cropping the layers before), or pick a factor that divides 9"},
		{"keep 20 of 18", Shape{18, 4, 4}, Layer{Kind: KindKeep, Keep: 20}, ErrKeepChannels, "channels",
			"channels 20 is more than the 18 input channels; keep at most 18, or widen the layer before to 20"},
		{"factor missing", Shape{4, 4, 4}, Layer{Kind: KindToSpace}, ErrValue, "factor", "factor is 0; it must be at least 1"},
		{"keep missing", Shape{4, 4, 4}, Layer{Kind: KindKeep}, ErrValue, "channels", "channels is 0; it must be at least 1"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r, _ := single(tt.in, tt.l)
			if r.Errors != 1 || len(r.Diags) == 0 || r.Diags[0].Code != tt.code || r.Diags[0].Field != tt.field {
				t.Fatalf("diagnostics %v; want one %s on %s", r.Diags, tt.code.Name(), tt.field)
			}
			if msg := r.Diags[0].Message(); msg != tt.msg {
				t.Errorf("message %q\nwant    %q", msg, tt.msg)
			}
		})
	}
}

func TestGroupWidth(t *testing.T) {
	tests := []struct {
		source         string
		in             Shape
		stride, groups int64
		params         int64
	}{
		{"torchvision regnet_y_400mf block1-0.f.b: 48 channels, 6 groups", Shape{48, 112, 112}, 2, 6, 3456},
		{"torchvision regnet_y_400mf block2-1.f.b: 104 channels, 13 groups", Shape{104, 28, 28}, 1, 13, 7488},
		{"torchvision regnet_y_400mf block3-0.f.b: 208 channels, 26 groups", Shape{208, 28, 28}, 2, 26, 14976},
		{"torchvision regnet_y_400mf block4-5.f.b: 440 channels, 55 groups", Shape{440, 7, 7}, 1, 55, 31680},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			l := Layer{Kind: KindConv, Filters: tt.in.C, Kernel: Square(3), Stride: Square(tt.stride), Pad: Padding{Size: Square(1)}, GroupWidth: 8, NoBias: true}
			r, row := single(tt.in, l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			out := (tt.in.H-1)/tt.stride + 1
			if row.Out != (Shape{tt.in.C, out, out}) || row.Params != tt.params || row.MACs != tt.params*out*out {
				t.Errorf("out %v params %d MACs %d; want %d×%d×%d, %d, %d", row.Out, row.Params, row.MACs, tt.in.C, out, out, tt.params, tt.params*out*out)
			}
			if g := l.GroupsFor(tt.in.C); g != tt.groups {
				t.Errorf("groups %d, want %d", g, tt.groups)
			}
			// The same layer with the groups written out computes the same.
			l.GroupWidth, l.Groups = 0, tt.groups
			_, same := single(tt.in, l)
			if same.Params != row.Params || same.MACs != row.MACs {
				t.Errorf("with groups %d: params %d MACs %d, want %d %d", tt.groups, same.Params, same.MACs, row.Params, row.MACs)
			}
		})
	}
	// A width that is not a multiple of the group width has no grouping;
	// PyTorch's Conv2d refuses in_channels not divisible by groups.
	r, _ := single(Shape{100, 8, 8}, Layer{Kind: KindConv, Filters: 100, Kernel: Square(3), GroupWidth: 8})
	if !hasCode(r, ErrGroupWidth) || r.Diags[0].Field != "group-width" {
		t.Fatalf("100 channels at group width 8: %v, want ErrGroupWidth on group-width", r.Diags)
	}
	if msg := r.Diags[0].Message(); msg != "input channels 100 are not a multiple of group-width 8 (groups = input channels / group width); pick a group width that divides 100, e.g. 4, or write groups instead" {
		t.Errorf("message %q", msg)
	}
	if got := r.Describe(r.Diags[0]); got[:len("layer 1 (conv)")] != "layer 1 (conv)" {
		t.Errorf("describe %q", got)
	}
}

func TestRelativeToInput(t *testing.T) {
	dw := Layer{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(3), Pad: Padding{Size: Square(1)}, Depthwise: true, NoBias: true}
	tests := []struct {
		source   string
		relInput bool
		out      int64
		params   int64
		err      Code
	}{
		{"Sandler et al. 2018, Table 1: the depthwise step reads the 144 expanded channels", true, 144, 144 * 9, 0},
		{"x1 of the block's input is 24, which the 144 channels do not group into (PyTorch: out_channels divisible by groups)", false, 0, 0, ErrGroupsFilters},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			l := dw
			l.RelInput = tt.relInput
			s := &Stack{Input: Shape{24, 56, 56}, Layers: []Layer{{Kind: KindBlock, Repeat: 1, Body: []Layer{
				{Kind: KindConv, Rel: Rel{Mul: 6}, Kernel: Square(1), NoBias: true}, l}}}}
			r := Evaluate(s)
			if tt.err != 0 {
				if !hasCode(r, tt.err) {
					t.Fatalf("diagnostics %v, want %v", r.Diags, tt.err)
				}
				return
			}
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			row := r.Rows[1]
			if row.Out.C != tt.out || row.Params != tt.params {
				t.Errorf("out %v params %d, want %d channels, %d", row.Out, row.Params, tt.out, tt.params)
			}
			if got := r.Explain(1); !contains(got, "width = channels of this layer's input × 1 = 144") {
				t.Errorf("explain %q", got)
			}
		})
	}
}

func contains(lines []string, s string) bool {
	for _, l := range lines {
		if l == s {
			return true
		}
	}
	return false
}

// TestSpatialGate checks the spatial gate of Woo et al. 2018 (CBAM,
// equation 3 and Figure 2): σ(f^{k×k}([AvgPool(F); MaxPool(F)])), the
// pooling along the channels, one output channel, padding keeping the
// size, so the parameters are k·k·2 weights, a bias (nn.Conv2d's default)
// and, with the batch norm of the authors' code (from memory: the
// convolution without bias, then BatchNorm2d(1)), its scale and shift and
// three buffers (PyTorch's BatchNorm2d: running mean, running variance,
// num_batches_tracked). The MACs are the convolution's (k·k·2 per
// position); the receptive field widens by k − 1 (a k×k window at unit
// stride, Araujo et al. 2019, "Computing receptive fields of
// convolutional neural networks", r = r₀ + (k − 1)·j).
func TestSpatialGate(t *testing.T) {
	tests := []struct {
		source                string
		in                    Shape
		l                     Layer
		params, buffers, macs int64
		rf                    float64
	}{
		{"Woo et al. 2018, eq. 3: 7×7 on ResNet-50's conv2_x output, 256×56×56", Shape{256, 56, 56},
			Layer{Kind: KindSpatialGate, Kernel: Square(7)}, 7*7*2 + 1, 0, 7 * 7 * 2 * 56 * 56, 7},
		{"Woo et al. 2018, the authors' code (from memory): no bias, batch norm", Shape{256, 56, 56},
			Layer{Kind: KindSpatialGate, Kernel: Square(7), NoBias: true, GateNorm: true}, 7*7*2 + 2, 3, 7 * 7 * 2 * 56 * 56, 7},
		{"Woo et al. 2018, Table 3 (from memory): the 3×3 kernel it compares, on conv5_x's 2048×7×7", Shape{2048, 7, 7},
			Layer{Kind: KindSpatialGate, Kernel: Square(3)}, 3*3*2 + 1, 0, 3 * 3 * 2 * 7 * 7, 3},
		{"PyTorch Conv2d's output size: 7×7 padded by 3 keeps a 1×1 map ((1 + 6 − 7)/1 + 1 = 1)", Shape{5, 1, 1},
			Layer{Kind: KindSpatialGate, Kernel: Square(7), NoBias: true}, 7 * 7 * 2, 0, 7 * 7 * 2, 7},
		{"PyTorch Conv2d's output size: a 1×1 gate of one channel's own mean and max", Shape{3, 9, 5},
			Layer{Kind: KindSpatialGate, Kernel: Square(1)}, 3, 0, 2 * 9 * 5, 1},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			r, row := single(tt.in, tt.l)
			if r.Errors != 0 {
				t.Fatalf("unexpected errors: %v", r.Diags)
			}
			if row.Out != tt.in || row.Params != tt.params || row.Buffers != tt.buffers || row.MACs != tt.macs || row.RF != (FPair{tt.rf, tt.rf}) {
				t.Errorf("out %v params %d buffers %d MACs %d rf %v; want %v, %d, %d, %d, %g",
					row.Out, row.Params, row.Buffers, row.MACs, row.RF, tt.in, tt.params, tt.buffers, tt.macs, tt.rf)
			}
		})
	}
	// After a stride-2 layer each tap of the window is two input pixels
	// apart: 3 + (7 − 1)·2 = 15 (Araujo et al. 2019).
	r := Evaluate(&Stack{Input: Shape{3, 32, 32}, Layers: []Layer{
		{Kind: KindConv, Filters: 8, Kernel: Square(3), Stride: Square(2), Pad: Padding{Size: Square(1)}},
		{Kind: KindSpatialGate, Kernel: Square(7)}}})
	if r.Errors != 0 || r.Rows[1].RF != (FPair{15, 15}) || r.Rows[1].Out != (Shape{8, 16, 16}) {
		t.Errorf("after a stride-2 conv: rf %v out %v (%v), want 15×15, 8×16×16", r.Rows[1].RF, r.Rows[1].Out, r.Diags)
	}
	// An even kernel cannot keep the size with equal padding on both sides
	// (PyTorch Conv2d: (H + 2·(k − 1)/2 − k)/1 + 1 = H − 1 for even k);
	// zero is no window at all.
	for _, k := range []int64{6, 0} {
		r, _ := single(Shape{8, 10, 10}, Layer{Kind: KindSpatialGate, Kernel: Square(k)})
		if r.Errors != 1 || r.Diags[0].Field != "kernel" {
			t.Errorf("kernel %d: %v, want one error on kernel", k, r.Diags)
		}
	}
	r, _ = single(Shape{8, 10, 10}, Layer{Kind: KindSpatialGate, Kernel: Square(6)})
	if msg := r.Diags[0].Message(); !hasCode(r, ErrGateKernel) || msg != "kernel 6 is even; the spatial gate pads (k − 1)/2 on each side to keep the map's size, which needs an odd kernel: use 5 or 7" {
		t.Errorf("message %q", msg)
	}
}
