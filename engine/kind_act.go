package engine

import (
	"fmt"
	"strconv"
	"strings"
)

// ActKind is an activation function: an index into
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
	ActMish
	ActSoftmax
	ActPReLU
)

// activation describes one activation function: element-wise, or (softmax)
// across the channels at each position.
type activation struct {
	name string
	// keepsOutput: autograd saves the function's output for the backward
	// pass (else its input), as PyTorch's derivative formulas do.
	keepsOutput bool
	// torch is the PyTorch module of an evaluated row (leaky-relu's takes
	// its slope, prelu's its slopes).
	torch func(row *Row) string
	// flops is the FLOPs per output element of each pass for the time
	// estimate; zero means 1. By our convention each comparison,
	// arithmetic operation, exp, log or tanh counts one.
	flops float64
}

func module(s string) func(*Row) string { return func(*Row) string { return s } }

// defaultPReLUSlope is the value nn.PReLU's slopes start at (its init,
// 0.25 in PyTorch's documentation), used when the slope is left out.
const defaultPReLUSlope = 0.25

// activations is every activation function, indexed by ActKind.
var activations = [...]activation{
	ActReLU: {"relu", true, module("nn.ReLU()"), 0},
	ActLeakyReLU: {name: "leaky-relu", torch: func(row *Row) string {
		slope := row.Layer.Slope
		if slope == 0 {
			slope = 0.01
		}
		return "nn.LeakyReLU(" + strconv.FormatFloat(slope, 'g', -1, 64) + ")"
	}},
	ActGELU:    {"gelu", false, module("nn.GELU()"), 0},
	ActSiLU:    {"silu", false, module("nn.SiLU()"), 0},
	ActSigmoid: {"sigmoid", true, module("nn.Sigmoid()"), 0},
	ActTanh:    {"tanh", true, module("nn.Tanh()"), 0},
	ActReLU6:   {"relu6", false, module("nn.ReLU6()"), 0}, // min(max(x, 0), 6); PyTorch saves the input
	// Howard et al. 2019 (Searching for MobileNetV3), its section on
	// nonlinearities: x·relu6(x + 3)/6 and relu6(x + 3)/6. PyTorch's
	// backward of each reads its input (checked with saved_tensors_hooks).
	ActHardSwish:   {"hard-swish", false, module("nn.Hardswish()"), 0},
	ActHardSigmoid: {"hard-sigmoid", false, module("nn.Hardsigmoid()"), 0},
	// Misra 2019 ("Mish: A Self Regularized Non-Monotonic Activation
	// Function"), x·tanh(softplus(x)): exp, add, log, tanh and a product
	// per element. PyTorch's backward reads its input
	// (saved_tensors_hooks on 1.13's nn.Mish).
	ActMish: {"mish", false, module("nn.Mish()"), 5},
	// The softmax over the channels at each position, exp(x_c)/Σ_c'
	// exp(x_c'): autograd keeps its output (saved_tensors_hooks on
	// PyTorch 1.13's nn.Softmax(dim=1)). Per element: the running
	// maximum, the difference, the exp, its share of the sum and the
	// division.
	ActSoftmax: {"softmax", true, module("nn.Softmax(dim=1)"), 5},
	// He et al. 2015 ("Delving Deep into Rectifiers"), eq. 1: max(0, x) +
	// a·min(0, x) with a learned slope a, one shared by every channel or
	// one per channel (nn.PReLU(1) or nn.PReLU(C)). Autograd keeps its
	// input and the slopes (a parameter, counted with the weights)
	// (saved_tensors_hooks on PyTorch 1.13).
	ActPReLU: {name: "prelu", torch: func(row *Row) string {
		return fmt.Sprintf("nn.PReLU(%d, init=%s)", preluSlopes(row.Layer, row.In), pyFloat(preluInit(row.Layer)))
	}, flops: 2},
}

// preluSlopes is the number of slopes a prelu layer learns on input in:
// one per channel, or one shared.
func preluSlopes(l *Layer, in Shape) int64 {
	if l.PerChannel {
		return in.C
	}
	return 1
}

// preluInit is the value a prelu layer's slopes start at.
func preluInit(l *Layer) float64 {
	if l.Slope == 0 {
		return defaultPReLUSlope
	}
	return l.Slope
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
	Params: []Param{{Key: "slope", Help: "negative slope of leaky-relu (0.01 when left out), or the value prelu's learned slopes start at (0.25 when left out)",
		Type: TFloat, FLo: 0, FHi: 1e6,
		QuickBare: true, FileDefault: true, Want: "give a number from 0, e.g. 0.2",
		Only:    func(l *Layer) bool { return l.Act == ActLeakyReLU || l.Act == ActPReLU },
		OnlyMsg: "slope applies only to leaky-relu and prelu; remove it or write act: leaky-relu",
		get:     func(l *Layer) Value { return Value{Float: l.Slope} },
		set:     func(l *Layer, v Value) { l.Slope = v.Float }},
		{Key: "per-channel", Help: "yes or no: prelu learns one slope per channel instead of one shared by all",
			Type: TBool, Words: []string{"", "per-channel"},
			Only:    func(l *Layer) bool { return l.Act == ActPReLU },
			OnlyMsg: "per-channel applies only to prelu; remove it or write act: prelu",
			get:     func(l *Layer) Value { return Value{Bool: l.PerChannel} },
			set:     func(l *Layer, v Value) { l.PerChannel = v.Bool }}},
	eval: func(c *calc, f *flow) {
		c.row.Out = c.row.In
		if c.l.Act == ActPReLU {
			c.row.Params = preluSlopes(c.l, c.row.In)
		}
	},
	explain: func(row *Row) []string {
		l := row.Layer
		switch l.Act {
		case ActPReLU:
			what := "one slope shared by every channel"
			if l.PerChannel {
				what = "one slope per channel"
			}
			return []string{fmt.Sprintf("params = %s (%s, starting at %s); out = max(0, x) + slope·min(0, x)",
				GroupDigits(row.Params), what, strconv.FormatFloat(preluInit(l), 'g', -1, 64))}
		case ActSoftmax:
			return []string{fmt.Sprintf("out = exp(x) / the sum of exp over the %d channels at each position; 0 params", row.In.C)}
		}
		return nil
	},
	work: func(row *Row) Work {
		f := 1.0
		if a := row.Layer.Act; int(a) < len(activations) && activations[a].flops > 0 {
			f = activations[a].flops
		}
		return elementWork(row, f)
	},
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
		return Torch{Module: activations[l.Act].torch(row)}
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
