package engine_test

import (
	"math"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// lastOut returns the output of the last row inside top-level item n.
func lastOut(r *engine.Result, item int) engine.Shape {
	var out engine.Shape
	for _, row := range r.Rows {
		if row.Path.At(0) == item {
			out = row.Out
		}
	}
	return out
}

// TestResNets checks residual networks written as blocks: parameter totals
// equal torchvision's published num_params and MACs round to its published
// GFLOPS (torchvision model documentation, the weights metadata of
// resnet18 … resnet152; its GFLOPS counts convolution and dense
// multiply-accumulates at batch 1). The exact MACs are derived by counting
// C_out·H_out·W_out·(C_in/groups)·k_h·k_w per convolution and in·out per
// dense layer, and each rounds to the printed value. Stage outputs are 112,
// 56, 28, 14, 7 for a 224 input (He et al. 2016, "Deep Residual Learning for
// Image Recognition", Table 1).
func TestResNets(t *testing.T) {
	tests := []struct {
		file   string
		params int64
		macs   int64
	}{
		{"published/resnet18.yaml", 11689512, 1814073344},   // torchvision resnet18: 11,689,512 params, 1.814 GFLOPS
		{"published/resnet34.yaml", 21797672, 3663761408},   // torchvision resnet34: 21,797,672 params, 3.664 GFLOPS
		{"published/resnet50.yaml", 25557032, 4089184256},   // torchvision resnet50: 25,557,032 params, 4.089 GFLOPS
		{"published/resnet101.yaml", 44549160, 7801405440},  // torchvision resnet101: 44,549,160 params, 7.801 GFLOPS
		{"published/resnet152.yaml", 60192808, 11513626624}, // torchvision resnet152: 60,192,808 params, 11.514 GFLOPS
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			r := engine.Evaluate(loadTestdata(t, tt.file))
			if r.Errors != 0 {
				t.Fatalf("errors: %v", r.Diags)
			}
			if r.Totals.Params != tt.params || r.Totals.MACs != tt.macs {
				t.Errorf("params %d MACs %d, want %d and %d", r.Totals.Params, r.Totals.MACs, tt.params, tt.macs)
			}
			// He et al. 2016 Table 1: conv1 112, pool 56, conv2_x 56, conv3_x 28, conv4_x 14, conv5_x 7.
			for item, size := range map[int]int64{1: 112, 4: 56, 5: 56, 6: 28, 7: 14, 8: 7} {
				if out := lastOut(r, item); out.H != size || out.W != size {
					t.Errorf("item %d gives %v, want %d×%d", item, out, size, size)
				}
			}
		})
	}
}

// TestResNetPaperLayout checks the paper's own layout (stride on the first
// 1×1 of each bottleneck) against He et al. 2016, Table 1, FLOPs row
// (multiply-adds): 3.8, 7.6 and 11.3 ×10⁹. The exact count of that layout
// is 3.858, 7.570 and 11.282 ×10⁹ (derived: convolution and dense
// multiply-accumulates counted layer by layer, as in TestResNets):
// ResNet-101 and -152 are within 1% of the printed values; ResNet-50's
// printed 3.8 sits 1.5% below the exact count of its own layout, so its
// tolerance is 1.6%.
func TestResNetPaperLayout(t *testing.T) {
	tests := []struct {
		file      string
		published float64
		tolerance float64
		exact     int64
	}{
		{"published/resnet50-paper.yaml", 3.8e9, 0.016, 3857973248},
		{"published/resnet101-paper.yaml", 7.6e9, 0.01, 7570194432},
		{"published/resnet152-paper.yaml", 11.3e9, 0.01, 11282415616},
	}
	for _, tt := range tests {
		r := engine.Evaluate(loadTestdata(t, tt.file))
		if r.Errors != 0 {
			t.Fatalf("%s: %v", tt.file, r.Diags)
		}
		if dev := math.Abs(float64(r.Totals.MACs)-tt.published) / tt.published; dev > tt.tolerance {
			t.Errorf("%s: MACs %d are %.2f%% from the paper's %.1fe9", tt.file, r.Totals.MACs, 100*dev, tt.published/1e9)
		}
		if r.Totals.MACs != tt.exact {
			t.Errorf("%s: MACs %d, derived %d", tt.file, r.Totals.MACs, tt.exact)
		}
	}
}

// TestDCGAN checks the generator of Radford et al. 2015, Fig. 1: projection
// and reshape to 4×4×1024, then 8×8×512, 16×16×256, 32×32×128, 64×64×3.
func TestDCGAN(t *testing.T) {
	r := engine.Evaluate(loadTestdata(t, "published/dcgan-generator.yaml"))
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	want := map[int]engine.Shape{2: {C: 1024, H: 4, W: 4}, 5: {C: 512, H: 8, W: 8}, 8: {C: 256, H: 16, W: 16}, 11: {C: 128, H: 32, W: 32}, 14: {C: 3, H: 64, W: 64}}
	for item, shape := range want {
		if out := lastOut(r, item); out != shape {
			t.Errorf("layer %d gives %v, want %v", item, out, shape)
		}
	}
}

func load(t *testing.T, src string) *engine.Stack {
	t.Helper()
	s, err := stackfile.Load([]byte(src))
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestBlockRepeats checks the repeat rule: the body is the first repeat;
// later repeats run with stride 1, so only the first downsamples, and the
// paths name item, repeat and layer.
func TestBlockRepeats(t *testing.T) {
	s := load(t, `stackfit: 1
input: [16, 32, 32]
layers:
  - block: 3
    name: stage
    layers:
      - {conv: 32, kernel: 3, stride: 2, pad: 1}
      - {act: relu}
  - block: 2
    strides: all
    layers:
      - {pool: max, kernel: 2}
`)
	r := engine.Evaluate(s)
	want := []struct {
		path string
		out  engine.Shape
	}{
		{"1.1.1", engine.Shape{C: 32, H: 16, W: 16}}, {"1.1.2", engine.Shape{C: 32, H: 16, W: 16}},
		{"1.2.1", engine.Shape{C: 32, H: 16, W: 16}}, {"1.2.2", engine.Shape{C: 32, H: 16, W: 16}},
		{"1.3.1", engine.Shape{C: 32, H: 16, W: 16}}, {"1.3.2", engine.Shape{C: 32, H: 16, W: 16}},
		{"2.1.1", engine.Shape{C: 32, H: 8, W: 8}}, {"2.2.1", engine.Shape{C: 32, H: 4, W: 4}},
	}
	if len(r.Rows) != len(want) {
		t.Fatalf("%d rows, want %d", len(r.Rows), len(want))
	}
	for i, w := range want {
		if got := r.Rows[i].Path.String(); got != w.path || r.Rows[i].Out != w.out {
			t.Errorf("row %d: %s %v, want %s %v", i, got, r.Rows[i].Out, w.path, w.out)
		}
	}
	// Params: first repeat 32·16·9 + 32, later ones 32·32·9 + 32 each.
	if want := int64(4640 + 2*9248); r.Totals.Params != want {
		t.Errorf("params %d, want %d", r.Totals.Params, want)
	}
	if got := engine.RowSummary(&r.Rows[2]); got != "conv 32 k3 p1" {
		t.Errorf("later repeat summary %q", got)
	}
}

// TestResidualShortcut checks the projection rule (He et al. 2016, option
// B): identity when shapes match, else a 1×1 convolution with the block's
// stride plus batch norm, as rows of their own counted in the totals.
func TestResidualShortcut(t *testing.T) {
	s := load(t, `stackfit: 1
input: [64, 56, 56]
layers:
  - block: 2
    residual: true
    after: relu
    layers:
      - {conv: 128, kernel: 3, stride: 2, pad: 1, bias: false}
      - {norm: batch}
`)
	r := engine.Evaluate(s)
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	var paths []string
	for _, row := range r.Rows {
		paths = append(paths, row.Path.String()+":"+row.Role.String())
	}
	want := "1.1.1:layer 1.1.2:layer 1.1.s1:shortcut 1.1.s2:shortcut 1.1.add:residual-add 1.1.act:after-add 1.2.1:layer 1.2.2:layer 1.2.add:residual-add 1.2.act:after-add"
	if got := strings.Join(paths, " "); got != want {
		t.Errorf("rows:\n%s\nwant\n%s", got, want)
	}
	sc := r.Rows[2]
	if sc.Out != (engine.Shape{C: 128, H: 28, W: 28}) || sc.Params != 64*128 || sc.MACs != 64*128*28*28 {
		t.Errorf("shortcut %v params %d macs %d", sc.Out, sc.Params, sc.MACs)
	}
	// Receptive field at the addition: the larger path (the body's 3×3 = 3).
	if add := r.Rows[4]; add.RF != (engine.FPair{H: 3, W: 3}) || add.Out != sc.Out {
		t.Errorf("add rf %v out %v", add.RF, add.Out)
	}
	want2 := int64(128*64*9 + 256 + 64*128 + 256 + 128*128*9 + 256)
	if r.Totals.Params != want2 {
		t.Errorf("params %d, want %d", r.Totals.Params, want2)
	}
}

// TestMerges checks named concatenation and addition, U-Net style
// center cropping (Ronneberger et al. 2015 crop the encoder map to the
// decoder's size) and the receptive field through a merge.
func TestMerges(t *testing.T) {
	s := load(t, `stackfit: 1
input: [3, 64, 64]
layers:
  - {conv: 16, kernel: 3, name: enc}
  - {pool: max, kernel: 2}
  - {conv: 32, kernel: 3}
  - {deconv: 16, kernel: 2, stride: 2}
  - {concat: enc, crop: true}
  - {conv: 32, kernel: 1}
`)
	r := engine.Evaluate(s)
	if r.Errors != 0 {
		t.Fatal(r.Diags)
	}
	// enc 62×62; pool 31; conv 29; up 58; concat crops enc 62 → 58.
	cat := r.Rows[4]
	if cat.Out != (engine.Shape{C: 32, H: 58, W: 58}) {
		t.Errorf("concat out %v", cat.Out)
	}
	notes := r.DiagsFor(4)
	if len(notes) != 1 || notes[0].Severity != engine.SevInfo ||
		notes[0].Message() != `center-crops "enc" from 62×62 to 58×58 (4 rows and 4 columns removed, split between the two sides)` {
		t.Errorf("notes %v", notes)
	}
	if cat.RF.H < r.Rows[3].RF.H {
		t.Errorf("merge rf %v smaller than its input's %v", cat.RF, r.Rows[3].RF)
	}
}

// TestMergeErrors checks each merge problem is reported on its row, naming
// the block and repeat through the path.
func TestMergeErrors(t *testing.T) {
	const head = "stackfit: 1\ninput: [8, 16, 16]\nlayers:\n"
	tests := []struct {
		name, layers, path, want string
	}{
		{"unknown name", "  - {conv: 8, kernel: 1}\n  - {concat: nowhere}\n", "2",
			`no layer or block is named "nowhere"`},
		{"later layer", "  - {add: late}\n  - {conv: 8, kernel: 1, name: late}\n", "1",
			`"late" comes later in the stack; a merge can only use an earlier output`},
		{"add channels", "  - {conv: 8, kernel: 1, name: a}\n  - {conv: 16, kernel: 1}\n  - {add: a}\n", "3",
			`"a" has 8 channels but the map here has 16`},
		{"spatial mismatch", "  - {conv: 8, kernel: 1, name: a}\n  - {pool: max, kernel: 2}\n  - {add: a}\n", "3",
			`"a" is 16×16 but the map here is 8×8; add crop: true`},
		{"inside a block repeat", "  - {conv: 8, kernel: 1, name: a}\n  - block: 2\n    layers:\n      - {pool: max, kernel: 2, stride: 2}\n      - {add: a}\n", "2.1.2",
			`"a" is 16×16 but the map here is 8×8`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := engine.Evaluate(load(t, head+tt.layers))
			if r.Errors == 0 {
				t.Fatal("no error")
			}
			var d engine.Diagnostic
			for _, x := range r.Diags {
				if x.Severity == engine.SevError {
					d = x
					break
				}
			}
			if got := r.Rows[d.Row].Path.String(); got != tt.path {
				t.Errorf("error on %s, want %s", got, tt.path)
			}
			if !strings.Contains(d.Message(), tt.want) {
				t.Errorf("message %q lacks %q", d.Message(), tt.want)
			}
			if !strings.HasPrefix(r.Describe(d), "layer "+tt.path+" (") {
				t.Errorf("Describe %q does not name %s", r.Describe(d), tt.path)
			}
		})
	}
	// Names used twice, in a stack built without the loader.
	s := &engine.Stack{Input: engine.Shape{C: 8, H: 8, W: 8}, Layers: []engine.Layer{
		{Kind: engine.KindAct, Name: "x"}, {Kind: engine.KindAct, Name: "x"}}}
	r := engine.Evaluate(s)
	if r.Errors != 1 || r.Diags[0].Code != engine.ErrNameTwice || !strings.Contains(r.Diags[0].Message(), `name "x" is already used by layer 1`) {
		t.Errorf("duplicate name: %v", r.Diags)
	}
}

// TestRowLimit checks that repeats cannot make a stack expand without bound.
func TestRowLimit(t *testing.T) {
	inner := engine.Layer{Kind: engine.KindBlock, Repeat: 1000, Body: []engine.Layer{{Kind: engine.KindAct}}}
	outer := engine.Layer{Kind: engine.KindBlock, Repeat: 1000, Body: []engine.Layer{inner}}
	r := engine.Evaluate(&engine.Stack{Input: engine.Shape{C: 1, H: 1, W: 1}, Layers: []engine.Layer{outer, outer}})
	if r.Errors != 1 || r.Diags[0].Code != engine.ErrTooManyRows || len(r.Rows) != 0 {
		t.Errorf("rows %d diags %v path %s", len(r.Rows), r.Diags, r.Rows[0].Path)
	}
}

// TestNestingLimit checks that blocks deeper than MaxBlockDepth are an
// error on their own row, not truncated paths.
func TestNestingLimit(t *testing.T) {
	l := engine.Layer{Kind: engine.KindAct}
	for i := 0; i < 4; i++ {
		l = engine.Layer{Kind: engine.KindBlock, Repeat: 1, Body: []engine.Layer{l}}
	}
	r := engine.Evaluate(&engine.Stack{Input: engine.Shape{C: 1, H: 4, W: 4}, Layers: []engine.Layer{l}})
	if r.Errors != 1 || r.Diags[0].Code != engine.ErrNesting || r.Rows[0].Path.String() != "1.1.1.1.1.1.1" {
		t.Errorf("rows %d diags %v path %s", len(r.Rows), r.Diags, r.Rows[0].Path)
	}
}
