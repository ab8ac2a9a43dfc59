package engine

import (
	"fmt"
	"strconv"
	"strings"
)

// ActKind is an element-wise activation function: an index into
// activations.
type ActKind uint8

// Activation functions.
const (
	ActReLU ActKind = iota
	ActLeakyReLU
	ActGELU
	ActSiLU
	ActSigmoid
	ActTanh
	ActReLU6
	ActHardSwish
	ActHardSigmoid
)

// activation describes one element-wise function.
type activation struct {
	name string
	// keepsOutput: autograd saves the function's output for the backward
	// pass (else its input), as PyTorch's derivative formulas do.
	keepsOutput bool
	// torch is the PyTorch module; leaky-relu's takes its slope.
	torch func(slope float64) string
}

func module(s string) func(float64) string { return func(float64) string { return s } }

// activations is every activation function, indexed by ActKind.
var activations = [...]activation{
	ActReLU: {"relu", true, module("nn.ReLU()")},
	ActLeakyReLU: {"leaky-relu", false, func(slope float64) string {
		if slope == 0 {
			slope = 0.01
		}
		return "nn.LeakyReLU(" + strconv.FormatFloat(slope, 'g', -1, 64) + ")"
	}},
	ActGELU:    {"gelu", false, module("nn.GELU()")},
	ActSiLU:    {"silu", false, module("nn.SiLU()")},
	ActSigmoid: {"sigmoid", true, module("nn.Sigmoid()")},
	ActTanh:    {"tanh", true, module("nn.Tanh()")},
	ActReLU6:   {"relu6", false, module("nn.ReLU6()")}, // min(max(x, 0), 6); PyTorch saves the input
	// Howard et al. 2019 (Searching for MobileNetV3), its section on
	// nonlinearities: x·relu6(x + 3)/6 and relu6(x + 3)/6. PyTorch's
	// backward of each reads its input (checked with saved_tensors_hooks).
	ActHardSwish:   {"hard-swish", false, module("nn.Hardswish()")},
	ActHardSigmoid: {"hard-sigmoid", false, module("nn.Hardsigmoid()")},
}

// String returns the stack-file value.
func (a ActKind) String() string {
	if int(a) < len(activations) {
		return activations[a].name
	}
	return "invalid"
}

// ActKinds lists the activation functions.
func ActKinds() []ActKind {
	out := make([]ActKind, len(activations))
	for i := range out {
		out[i] = ActKind(i)
	}
	return out
}

var actList = names(ActKinds())

var actSpec = Spec{
	keepLayout: true,
	Kind:       KindAct, Key: "act", Help: strings.Join(actList, ", "), Example: "act relu",
	Main: &Param{Key: "function", Help: strings.Join(actList, ", "), Type: TChoice, Choices: actList,
		Need: "a function: " + strings.Join(actList, ", "),
		get:  func(l *Layer) Value { return Value{Int: int64(l.Act)} },
		set:  func(l *Layer, v Value) { l.Act = ActKind(v.Int) }},
	Params: []Param{{Key: "slope", Help: "negative slope of leaky-relu, e.g. 0.01", Type: TFloat, FLo: 0, FHi: 1e6,
		QuickBare: true, FileDefault: true, Want: "give a number from 0, e.g. 0.2",
		Only:    func(l *Layer) bool { return l.Act == ActLeakyReLU },
		OnlyMsg: "slope applies only to leaky-relu; remove it or write act: leaky-relu",
		get:     func(l *Layer) Value { return Value{Float: l.Slope} },
		set:     func(l *Layer, v Value) { l.Slope = v.Float }}},
	eval: func(c *calc, f *flow) { c.row.Out = c.row.In },
	saved: func(row *Row, s *saving) int64 {
		if a := row.Layer.Act; int(a) < len(activations) && activations[a].keepsOutput {
			return s.output(row)
		}
		return s.input(row)
	},
	torch: func(row *Row) Torch {
		l := row.Layer
		if int(l.Act) >= len(activations) {
			return Torch{}
		}
		return Torch{Module: activations[l.Act].torch(l.Slope)}
	},
}

var dropoutSpec = Spec{
	keepLayout: true,
	Kind:       KindDropout, Key: "dropout", Help: "zero a share of values while training", Example: "dropout 0.3",
	Main: &Param{Key: "rate", Help: "share of values zeroed, 0 to below 1", Type: TFloat, FLo: 0, FHi: 1,
		Label: "rate", Need: "a rate", Want: "give a number at least 0 and below 1, e.g. 0.25",
		get: func(l *Layer) Value { return Value{Float: l.Rate} },
		set: func(l *Layer, v Value) { l.Rate = v.Float }},
	eval: func(c *calc, f *flow) { c.row.Out = c.row.In },
	saved: func(row *Row, s *saving) int64 {
		if row.Layer.Rate <= 0 {
			return 0
		}
		out, _ := row.Out.Elements()
		return mul(&s.ov, out, s.a.MaskBytes) // the mask
	},
	torch: func(row *Row) Torch {
		return Torch{Module: fmt.Sprintf("nn.Dropout(%s)", strconv.FormatFloat(row.Layer.Rate, 'g', -1, 64))}
	},
}
