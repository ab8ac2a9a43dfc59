package onnximport

import (
	"fmt"
	"testing"

	"google.golang.org/protobuf/proto"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// normChain is conv 8 k1, then one batch norm per ε given (0: the node
// carries no epsilon, which ONNX reads as 1e-5).
func normChain(t *testing.T, eps ...float32) []byte {
	w := map[string][]int64{"w": {8, 3, 1, 1}}
	nodes := []*onnxpb.Node{node("Conv", "/stem/Conv", []string{"x", "w"}, "t0", ints("kernel_shape", 1, 1))}
	for i, e := range eps {
		p := fmt.Sprintf("n%d", i)
		for _, k := range []string{"s", "o", "m", "v"} {
			w[p+k] = []int64{8}
		}
		var attrs []*onnxpb.Attribute
		if e != 0 {
			attrs = append(attrs, &onnxpb.Attribute{Name: proto.String("epsilon"), Kind: proto.Int32(1), F: proto.Float32(e)})
		}
		out := fmt.Sprintf("t%d", i+1)
		if i == len(eps)-1 {
			out = "y"
		}
		nodes = append(nodes, node("BatchNormalization", "/bn"+p, []string{fmt.Sprintf("t%d", i), p + "s", p + "o", p + "m", p + "v"}, out, attrs...))
	}
	return model(t, [4]int64{1, 3, 8, 8}, 13, w, nodes...)
}

// TestImportNormEpsDefault checks that a ε most norms share becomes the
// file's default for norms, written once: torchvision's Inception v3 and
// GoogLeNet give every batch norm eps=0.001 (BasicConv2d in their model
// source); PyTorch's and ONNX's own default is 1e-5 (torch.nn.BatchNorm2d
// and the BatchNormalization operator's documentation).
func TestImportNormEpsDefault(t *testing.T) {
	tests := []struct {
		source  string
		eps     []float32
		def     float64   // the file's default, 0 for none
		written []float64 // each norm's own ε
	}{
		{"GoogLeNet's BasicConv2d: every norm at 0.001", []float32{0.001, 0.001, 0.001}, 0.001, []float64{0, 0, 0}},
		{"most at 0.001, one at PyTorch's default, which stays written", []float32{0.001, 0.001, 1e-5}, 0.001, []float64{0, 0, 1e-5}},
		{"an absent epsilon is ONNX's 1e-5, written when the default differs", []float32{0.001, 0.001, 0}, 0.001, []float64{0, 0, 1e-5}},
		{"PyTorch's default everywhere: nothing written", []float32{1e-5, 0, 1e-5}, 0, []float64{0, 0, 0}},
		{"no majority: each norm keeps its own", []float32{0.001, 0.01, 1e-5, 1e-5}, 0, []float64{0.001, 0.01, 0, 0}},
		{"a single norm: written on the layer", []float32{0.001}, 0, []float64{0.001}},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			s, _, err := Import(normChain(t, tt.eps...), "n")
			if err != nil {
				t.Fatal(err)
			}
			var def float64
			if d := s.Defaults.For(engine.KindNorm); d != nil {
				def = d.Eps
			}
			var got []float64
			walk(s.Layers, func(l *engine.Layer) {
				if l.Kind == engine.KindNorm {
					got = append(got, l.Eps)
				}
			})
			if def != tt.def || fmt.Sprint(got) != fmt.Sprint(tt.written) {
				t.Errorf("default %g, norms %v; want %g, %v", def, got, tt.def, tt.written)
			}
			// What each norm computes with is the graph's ε.
			r := engine.Evaluate(s)
			i := 0
			for _, row := range r.Rows {
				if row.Layer.Kind != engine.KindNorm {
					continue
				}
				want := f32(tt.eps[i]) // the float32 attribute as its shortest decimal
				if want == 0 {
					want = 1e-5
				}
				if e := row.Layer.Eps; e != want && !(e == 0 && want == 1e-5) {
					t.Errorf("norm %d computes with ε %g, want %g", i+1, e, want)
				}
				i++
			}
		})
	}
}

// groupedChain is a chain of 3×3 grouped convolutions, each after a 1×1
// convolution to its width: widths[i] channels in groups[i] groups.
func groupedChain(t *testing.T, widths, groups []int64) []byte {
	w := map[string][]int64{}
	var nodes []*onnxpb.Node
	cur, c := "x", int64(3)
	for i := range widths {
		p := fmt.Sprintf("u%d", i)
		w[p+"a"] = []int64{widths[i], c, 1, 1}
		w[p+"b"] = []int64{widths[i], widths[i] / groups[i], 3, 3}
		nodes = append(nodes,
			node("Conv", "/"+p+"/a/Conv", []string{cur, p + "a"}, p+"ya", ints("kernel_shape", 1, 1)),
			node("Conv", "/"+p+"/b/Conv", []string{p + "ya", p + "b"}, p+"yb", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1),
				&onnxpb.Attribute{Name: proto.String("group"), Kind: proto.Int32(2), I: proto.Int64(groups[i])}))
		cur, c = p+"yb", widths[i]
	}
	nodes[len(nodes)-1].Output = []string{"y"}
	return model(t, [4]int64{1, 3, 8, 8}, 13, w, nodes...)
}

// TestImportGroupWidth checks that grouped convolutions sharing one group
// width while their group counts differ are written with the group width
// (RegNet, Radosavovic et al. 2020: group width g, groups = w/g; torchvision
// regnet_y_400mf: 48, 104, 208, 440 channels at group width 8), and that
// ResNeXt's fixed cardinality (Xie et al. 2017: 32 groups whatever the
// width) keeps its groups.
func TestImportGroupWidth(t *testing.T) {
	tests := []struct {
		source        string
		widths, group []int64
		gw            int64 // 0: written as groups
	}{
		{"RegNet: 48 and 104 channels at group width 8", []int64{48, 104}, []int64{6, 13}, 8},
		{"ResNeXt: 32 groups at 128 and 256 channels", []int64{128, 256}, []int64{32, 32}, 0},
		{"group widths that differ", []int64{48, 104}, []int64{6, 8}, 0},
		// Howard et al. 2017: a depthwise convolution has one group per
		// input channel (PyTorch: groups = in_channels), which is not a
		// group width of 1 (MobileNetV2's 32, 96 and 144 channels).
		{"MobileNetV2's depthwise convolutions", []int64{32, 96, 144}, []int64{32, 96, 144}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.source, func(t *testing.T) {
			s, _, err := Import(groupedChain(t, tt.widths, tt.group), "g")
			if err != nil {
				t.Fatal(err)
			}
			var want int64 = 9 * 3 * tt.widths[0]
			for i := range tt.widths {
				if i > 0 {
					want += tt.widths[i-1] * tt.widths[i]
				}
				want += 9 * tt.widths[i] / tt.group[i] * tt.widths[i]
			}
			i := 0
			walk(s.Layers, func(l *engine.Layer) {
				if l.Kind != engine.KindConv || l.Kernel != engine.Square(3) {
					return
				}
				if l.GroupWidth != tt.gw || tt.gw == 0 && l.Groups != tt.group[i] || tt.gw != 0 && l.Groups != 0 {
					t.Errorf("conv %d: groups %d, group width %d; want groups %d or group width %d", i+1, l.Groups, l.GroupWidth, tt.group[i], tt.gw)
				}
				i++
			})
			want -= 9 * 3 * tt.widths[0] // the first 1×1 convolution reads 3 channels
			want += 3 * tt.widths[0]
			if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != want {
				t.Errorf("params %d, want %d: %v", r.Totals.Params, want, r.Diags)
			}
		})
	}
}
