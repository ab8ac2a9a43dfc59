package onnximport

import (
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// axis1 is a Concat's axis attribute: the channels.
func axis1() *onnxpb.Attribute {
	return &onnxpb.Attribute{Name: proto.String("axis"), Kind: proto.Int32(2), I: proto.Int64(1)}
}

// TestImportFlattenedConcat: torch.cat([a(x), torch.cat([c(y), d(y)])])
// with y = b(x), which PyTorch's exporter writes as one three-input Concat
// (Inception v3's modules, Szegedy et al. 2016, Figure 6), is a fork of
// two branches whose second ends in a nested fork. Counts by common
// practice: 1×1 convolutions without bias, 4·2 + 4·2 + 2·3 + 2·5 weights.
func TestImportFlattenedConcat(t *testing.T) {
	w := map[string][]int64{"wa": {2, 4, 1, 1}, "wb": {2, 4, 1, 1}, "wc": {3, 2, 1, 1}, "wd": {5, 2, 1, 1}}
	cat := node("Concat", "/m/Concat", []string{"a", "c", "d"}, "z")
	cat.Attribute = append(cat.Attribute, axis1())
	data := model(t, [4]int64{1, 4, 8, 8}, 13, w,
		node("Conv", "/m/a/Conv", []string{"x", "wa"}, "a", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/b/Conv", []string{"x", "wb"}, "y", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/c/Conv", []string{"y", "wc"}, "c", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/d/Conv", []string{"y", "wd"}, "d", ints("kernel_shape", 1, 1)),
		cat,
	)
	s, _, err := Import(data, "flat")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Layers) != 1 || s.Layers[0].Kind != engine.KindFork || len(s.Layers[0].Body) != 2 {
		t.Fatalf("layers %+v", s.Layers)
	}
	second := s.Layers[0].Body[1].Body
	if len(second) != 2 || second[1].Kind != engine.KindFork || len(second[1].Body) != 2 {
		t.Fatalf("second branch %+v", second)
	}
	r := engine.Evaluate(s)
	if r.Errors != 0 || r.Totals.Params != 8+8+6+10 || r.Output != (engine.Shape{C: 10, H: 8, W: 8}) {
		t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
	}
	// The inner paths must fill adjacent inputs: cat([c(y), a(x), d(y)])
	// has no stack-file form.
	cat2 := node("Concat", "/m/Concat", []string{"c", "a", "d"}, "z")
	cat2.Attribute = append(cat2.Attribute, axis1())
	data = model(t, [4]int64{1, 4, 8, 8}, 13, w,
		node("Conv", "/m/a/Conv", []string{"x", "wa"}, "a", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/b/Conv", []string{"x", "wb"}, "y", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/c/Conv", []string{"y", "wc"}, "c", ints("kernel_shape", 1, 1)),
		node("Conv", "/m/d/Conv", []string{"y", "wd"}, "d", ints("kernel_shape", 1, 1)),
		cat2,
	)
	if _, _, err := Import(data, "crossed"); err == nil {
		t.Errorf("interleaved nested inputs imported")
	}
}

// TestImportSharedWeight: an export routes a weight that two layers use
// (or equal folded values it deduplicated) through Identity; each layer
// counts it, as the module it came from does (common practice: PyTorch's
// exporter writes Identity for a tensor read under a second name). 4·4·3·3
// weights twice.
func TestImportSharedWeight(t *testing.T) {
	data := model(t, [4]int64{1, 4, 8, 8}, 13, map[string][]int64{"w": {4, 4, 3, 3}},
		node("Conv", "/a/Conv", []string{"x", "w"}, "c", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
		node("Identity", "Identity_0", []string{"w"}, "w2"),
		node("Conv", "/b/Conv", []string{"c", "w2"}, "y", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
	)
	s, _, err := Import(data, "shared")
	if err != nil {
		t.Fatal(err)
	}
	if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != 2*4*4*3*3 {
		t.Errorf("params %d, %v", r.Totals.Params, r.Diags)
	}
}

// TestImportSplitFork: a split of the channels into two equal parts, one
// passed on and one through a 1×1 convolution, joined in order — ShuffleNet
// V2's unit (Ma et al. 2018, Figure 3c) — is a fork with split input; its
// parts joined out of order have no stack-file form. 4·4 weights.
func TestImportSplitFork(t *testing.T) {
	build := func(order []string) []byte {
		split := &onnxpb.Node{OpType: proto.String("Split"), Name: proto.String("/u/Split"), Input: []string{"x"}, Output: []string{"a", "b"},
			Attribute: []*onnxpb.Attribute{axis1()}}
		cat := node("Concat", "/u/Concat", order, "y")
		cat.Attribute = append(cat.Attribute, axis1())
		return model(t, [4]int64{1, 8, 8, 8}, 13, map[string][]int64{"w": {4, 4, 1, 1}},
			split,
			node("Conv", "/u/conv/Conv", []string{"b", "w"}, "c", ints("kernel_shape", 1, 1)),
			cat,
		)
	}
	s, _, err := Import(build([]string{"a", "c"}), "unit")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Layers) != 1 || s.Layers[0].Kind != engine.KindFork || !s.Layers[0].Split || len(s.Layers[0].Body) != 2 ||
		len(s.Layers[0].Body[0].Body) != 0 || len(s.Layers[0].Body[1].Body) != 1 {
		t.Fatalf("layers %+v", s.Layers)
	}
	if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != 16 || r.Output != (engine.Shape{C: 8, H: 8, W: 8}) {
		t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
	}
	if _, _, err := Import(build([]string{"c", "a"}), "swapped"); err == nil || !strings.Contains(err.Error(), "order") {
		t.Errorf("parts joined out of order: %v", err)
	}
}

// TestImportUNetSkip: torch.cat([e, up(down(e))]) — a U-Net's skip
// (Ronneberger et al. 2015, Figure 1), a path that goes down and comes
// back up joined after the map it left — is written flat as a named
// concatenation with the named map first, not nested; a path that keeps
// the size (DenseNet's) stays a block with dense links. Weights by common
// practice: 4·3·3·3 + 8·4·3·3 + 8·4·2·2 with no biases.
func TestImportUNetSkip(t *testing.T) {
	build := func(down bool) []byte {
		pool := node("MaxPool", "/pool/MaxPool", []string{"e"}, "p", ints("kernel_shape", 2, 2), ints("strides", 2, 2))
		up := node("ConvTranspose", "/up/ConvTranspose", []string{"m", "u"}, "b", ints("kernel_shape", 2, 2), ints("strides", 2, 2))
		if !down {
			pool = node("MaxPool", "/pool/MaxPool", []string{"e"}, "p", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1))
			up = node("Conv", "/up/Conv", []string{"m", "v"}, "b", ints("kernel_shape", 1, 1))
		}
		cat := node("Concat", "/Concat", []string{"e", "b"}, "y")
		cat.Attribute = append(cat.Attribute, axis1())
		return model(t, [4]int64{1, 3, 16, 16}, 13, map[string][]int64{"w": {4, 3, 3, 3}, "w2": {8, 4, 3, 3}, "u": {8, 4, 2, 2}, "v": {4, 8, 1, 1}},
			node("Conv", "/enc/Conv", []string{"x", "w"}, "e", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
			pool,
			node("Conv", "/mid/Conv", []string{"p", "w2"}, "m", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1)),
			up,
			cat,
		)
	}
	s, _, err := Import(build(true), "unet")
	if err != nil {
		t.Fatal(err)
	}
	last := s.Layers[len(s.Layers)-1]
	if len(s.Layers) != 5 || last.Kind != engine.KindConcat || !last.First || last.From == "" || last.From != s.Layers[0].Name {
		t.Fatalf("layers %+v", s.Layers)
	}
	if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != 4*3*3*3+8*4*3*3+8*4*2*2 || r.Output != (engine.Shape{C: 8, H: 16, W: 16}) {
		t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
	}
	s, _, err = Import(build(false), "dense")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Layers) != 2 || s.Layers[1].Kind != engine.KindBlock || !s.Layers[1].DenseLinks {
		t.Errorf("a path that keeps the size: %+v", s.Layers)
	}
}

// TestImportCroppedSkip: a U-Net without padding crops its encoder's map
// to the decoder's size before the join (Ronneberger et al. 2015, Figure
// 1: "copy and crop"); the exporter writes the crop as two Slices of the
// height and width. It imports as a named concatenation with crop; an
// off-centre window has no such form. 2·3·3·3 + 2·2·3·3 + 2·2·2·2 weights.
func TestImportCroppedSkip(t *testing.T) {
	build := func(top int64) []byte {
		cat := node("Concat", "/Concat", []string{"s2", "b"}, "y")
		cat.Attribute = append(cat.Attribute, axis1())
		// e is 2×12×12; the path gives 2×8×8 (pool to 6, conv to 4, up to 8).
		return modelWith(t, [4]int64{1, 3, 14, 14}, 13, map[string][]int64{"w": {2, 3, 3, 3}, "w2": {2, 2, 3, 3}, "u": {2, 2, 2, 2}},
			[]*onnxpb.Tensor{rawInt64("h0", top), rawInt64("h1", top+8), rawInt64("ax2", 2), rawInt64("w0", 2), rawInt64("w1", 10), rawInt64("ax3", 3)},
			node("Conv", "/enc/Conv", []string{"x", "w"}, "e", ints("kernel_shape", 3, 3)),
			node("MaxPool", "/pool/MaxPool", []string{"e"}, "p", ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Conv", "/mid/Conv", []string{"p", "w2"}, "m", ints("kernel_shape", 3, 3)),
			node("ConvTranspose", "/up/ConvTranspose", []string{"m", "u"}, "b", ints("kernel_shape", 2, 2), ints("strides", 2, 2)),
			node("Slice", "/Slice", []string{"e", "h0", "h1", "ax2"}, "s1"),
			node("Slice", "/Slice_1", []string{"s1", "w0", "w1", "ax3"}, "s2"),
			cat,
		)
	}
	s, _, err := Import(build(2), "unet")
	if err != nil {
		t.Fatal(err)
	}
	last := s.Layers[len(s.Layers)-1]
	if last.Kind != engine.KindConcat || !last.Crop || !last.First || last.From != s.Layers[0].Name {
		t.Fatalf("layers %+v", s.Layers)
	}
	if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != 2*3*3*3+2*2*3*3+2*2*2*2 || r.Output != (engine.Shape{C: 4, H: 8, W: 8}) {
		t.Errorf("params %d, output %v, %v", r.Totals.Params, r.Output, r.Diags)
	}
	if _, _, err := Import(build(1), "off-centre"); err == nil {
		t.Errorf("an off-centre window imported as a centred crop")
	}
}
