package engine_test

import (
	"os"
	"path/filepath"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

func loadTestdata(t testing.TB, name string) *engine.Stack {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return s
}

// TestPublishedTotals checks whole networks against published totals.
// Parameters and GFLOPS (giga multiply-accumulates of the convolution and
// dense layers at batch 1) are torchvision's model documentation (weights
// metadata num_params and GFLOPS); VGG's are also in Simonyan & Zisserman
// 2015, "Very Deep Convolutional Networks for Large-Scale Image
// Recognition", Table 2, in millions. The exact MACs are derived by counting
// C_out·H_out·W_out·(C_in/groups)·k_h·k_w per convolution and in·out per
// dense layer; each rounds to torchvision's printed GFLOPS.
func TestPublishedTotals(t *testing.T) {
	tests := []struct {
		file   string
		source string
		params int64
		macs   int64
	}{
		{"published/alexnet.yaml", "torchvision alexnet: 61,100,840 params, 0.714 GFLOPS", 61100840, 714188480},
		{"published/vgg11.yaml", "torchvision vgg11: 132,863,336 params, 7.609 GFLOPS", 132863336, 7609090048},
		{"published/vgg11-bn.yaml", "torchvision vgg11_bn: 132,868,840 params", 132868840, 7609090048},
		{"published/vgg13.yaml", "torchvision vgg13: 133,047,848 params, 11.308 GFLOPS", 133047848, 11308466176},
		{"published/vgg13-bn.yaml", "torchvision vgg13_bn: 133,053,736 params", 133053736, 11308466176},
		{"published/vgg16.yaml", "torchvision vgg16: 138,357,544 params, 15.47 GFLOPS; Simonyan & Zisserman 2015 Table 2: 138 M", 138357544, 15470264320},
		{"published/vgg16-bn.yaml", "torchvision vgg16_bn: 138,365,992 params", 138365992, 15470264320},
		{"published/vgg19.yaml", "torchvision vgg19: 143,667,240 params, 19.632 GFLOPS; Simonyan & Zisserman 2015 Table 2: 144 M", 143667240, 19632062464},
		{"published/vgg19-bn.yaml", "torchvision vgg19_bn: 143,678,248 params", 143678248, 19632062464},
		// The mobile and efficient families: parameters (and GFLOPS where
		// quoted) from torchvision's model documentation; the exact MACs
		// are what torchvision's own modules count at 224×224, one weight
		// use per output position, in the torchvision comparison
		// (engine/export/torchvision_test.go), which these totals repeat
		// so that they hold without PyTorch too.
		{"published/mobilenet-v2.yaml", "torchvision mobilenet_v2: 3,504,872 params, 0.30 GFLOPS", 3504872, 300774272},
		{"published/mobilenet-v3-small.yaml", "torchvision mobilenet_v3_small: 2,542,856 params (weights metadata)", 2542856, 56510400},
		{"published/efficientnet-b0.yaml", "torchvision efficientnet_b0: 5,288,548 params, 0.39 GFLOPS", 5288548, 385814752},
		{"published/densenet121.yaml", "torchvision densenet121: 7,978,856 params, 2.83 GFLOPS", 7978856, 2834161664},
		{"published/squeezenet1-1.yaml", "torchvision squeezenet1_1: 1,235,496 params (weights metadata)", 1235496, 349151936},
		{"published/googlenet.yaml", "torchvision googlenet: 6,624,904 params, 1.50 GFLOPS", 6624904, 1498376192},
		{"published/convnext-tiny.yaml", "torchvision convnext_tiny: 28,589,128 params, 4.46 GFLOPS", 28589128, 4455531264},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			r := engine.Evaluate(loadTestdata(t, tt.file))
			if r.Errors != 0 {
				t.Fatalf("errors: %v", r.Diags)
			}
			if r.Totals.Params != tt.params {
				t.Errorf("params = %d, want %d (%s)", r.Totals.Params, tt.params, tt.source)
			}
			if r.Totals.MACs != tt.macs {
				t.Errorf("MACs = %d, want %d (%s)", r.Totals.MACs, tt.macs, tt.source)
			}
		})
	}
}

// TestLeNet5 checks the layers of LeNet-5 whose trainable parameters
// LeCun et al. 1998 state: C1 = 156, C5 = 48,120, F6 = 10,164, with C1's
// 6 maps of 28×28 and C5's 120 maps of 1×1.
func TestLeNet5(t *testing.T) {
	r := engine.Evaluate(loadTestdata(t, "published/lenet5.yaml"))
	want := map[string]struct {
		params int64
		out    engine.Shape
	}{
		"C1": {156, engine.Shape{C: 6, H: 28, W: 28}},
		"C5": {48120, engine.Shape{C: 120, H: 1, W: 1}},
		"F6": {10164, engine.Shape{C: 84, H: 1, W: 1}},
	}
	found := 0
	for _, row := range r.Rows {
		w, ok := want[row.Layer.Name]
		if !ok {
			continue
		}
		found++
		if row.Params != w.params || row.Out != w.out {
			t.Errorf("%s: params %d out %v, want %d and %v (LeCun et al. 1998)", row.Layer.Name, row.Params, row.Out, w.params, w.out)
		}
	}
	if found != len(want) {
		t.Fatalf("found %d of %d named layers", found, len(want))
	}
}
