package engine

import "fmt"

// spatialGateSpec is the spatial attention module of Woo et al. 2018
// (CBAM, section 3 and Figure 2): at every position the channels' mean
// and maximum form a 2×H×W map, a k×k convolution (7×7 in the paper,
// padded to keep the size) turns it into one channel, a sigmoid makes it
// a gate, and every channel of the input is multiplied by the gate at its
// position: out = x · σ(conv([mean_c x; max_c x])).
//
// The paper's equation 3 has the convolution straight into the sigmoid,
// which is the default. Its authors' code puts a batch norm (one channel)
// between them; batch-norm: yes adds it, so a stack can match either. The
// convolution's bias is a plain convolution's choice (yes by default, as
// nn.Conv2d has it).
var spatialGateSpec = Spec{
	Kind: KindSpatialGate, Key: "spatial-gate",
	Help:    "scale each position by a gate from the channels' mean and max (spatial attention)",
	Example: "spatial-gate k7",
	Main: &Param{Key: "kernel", Help: "odd n: the n×n convolution over the mean and max maps; 7 when left out",
		Type: TInt, Lo: 1, Hi: MaxWindow, Label: "kernel", Quick: "k", Optional: true, Default: Value{Int: 7},
		Need: "an odd kernel, e.g. 7",
		get:  func(l *Layer) Value { return Value{Int: l.Kernel.H} },
		set:  func(l *Layer, v Value) { l.Kernel = Square(v.Int) }},
	Params: []Param{biasParam,
		{Key: "batch-norm", Help: "yes or no: a batch norm between the convolution and the sigmoid", Type: TBool,
			Words: []string{"", "batch-norm"},
			get:   func(l *Layer) Value { return Value{Bool: l.GateNorm} },
			set:   func(l *Layer, v Value) { l.GateNorm = v.Bool }}},
	Bare:       true,
	keepLayout: true, // the product is element-wise, x · gate
	eval:       func(c *calc, f *flow) { c.spatialGate(f) },
	explain: func(row *Row) []string {
		l, in := row.Layer, row.In
		k := l.Kernel.H
		parts := fmt.Sprintf("%d·%d·2", k, k)
		if !l.NoBias {
			parts += " + 1 (bias)"
		}
		if l.GateNorm {
			parts += " + 2 (norm scale and shift)"
		}
		out := []string{
			fmt.Sprintf("gate = sigmoid(conv %d×%d over [mean; max] of the %d channels), 1×%d×%d", k, k, in.C, in.H, in.W),
			fmt.Sprintf("params = %s = %s", parts, GroupDigits(row.Params)),
		}
		if row.Buffers > 0 {
			out = append(out, fmt.Sprintf("buffers = %d (the norm's running mean, variance, step count)", row.Buffers))
		}
		return append(out, fmt.Sprintf("MACs = %d·%d·2 weights × %d·%d positions = %s; the means, maxima and the %d·%d·%d products count 0 by our convention",
			k, k, in.H, in.W, FormatCount(row.MACs), in.C, in.H, in.W))
	},
	saved: savedSpatialGate,
	work:  spatialGateWork,
	torch: func(row *Row) Torch {
		l := row.Layer
		return Torch{Module: fmt.Sprintf("SpatialGate(%d, bias=%s, norm=%s)", l.Kernel.H, pyBool(!l.NoBias), pyBool(l.GateNorm))}
	},
}

// spatialGate computes the gate's row: the map's shape, the convolution's
// weights (2 inputs, 1 output, k×k), its bias and the norm's two
// parameters and three buffers (running mean, variance and step count,
// as nn.BatchNorm2d keeps them).
func (c *calc) spatialGate(f *flow) {
	in, k := c.row.In, c.l.Kernel.H
	if !c.atLeast("kernel", k, 1) {
		return
	}
	if k%2 == 0 {
		c.fail(Diagnostic{Code: ErrGateKernel, Field: "kernel", A: k})
		return
	}
	w := mul(&c.ov, mul(&c.ov, k, k), 2)
	params := w
	if !c.l.NoBias {
		params = add(&c.ov, params, 1)
	}
	if c.l.GateNorm {
		params = add(&c.ov, params, 2)
		c.row.Buffers = 3
	}
	macs := mul(&c.ov, w, mul(&c.ov, in.H, in.W))
	if !c.checkOverflow("parameters or MACs") {
		return
	}
	c.row.Out, c.row.Params, c.row.MACs = in, params, macs
	// Each output position sees every channel of the k×k window around it.
	f.rf.H += float64(k-1) * f.jump.H
	f.rf.W += float64(k-1) * f.jump.W
}

// savedSpatialGate is what autograd keeps for the composed operations
// (checked with torch.autograd.graph.saved_tensors_hooks on PyTorch 1.13,
// testdata/papers/spatialgate.py): the product x · gate keeps the input
// (for the gate's gradient; it always has one, the convolution learns)
// and the gate; the sigmoid keeps its output, the same tensor; the
// convolution keeps its input, the concatenated 2×H×W map; a norm keeps
// the convolution's 1×H×W output; and when the input needs a gradient the
// maximum keeps the int64 index of each position's largest channel (the
// mean and the concatenation keep nothing). All but the input are the
// row's own tensors: kept besides the rows' outputs, released at its
// backward.
func savedSpatialGate(row *Row, s *saving) int64 {
	ov := &s.ov
	hw := mul(ov, row.In.H, row.In.W)
	maps := int64(3) // the concatenated pair and the gate
	if row.Layer.GateNorm {
		maps++
	}
	b := add(ov, s.input(row), mul(ov, mul(ov, maps, hw), s.e))
	if row.Grad {
		b = add(ov, b, mul(ov, hw, s.a.IndexBytes))
	}
	return b
}

// spatialGateWork is the gate's time-estimate rule, memory-bound: forward
// reads the map three times (the mean, the maximum, the product), writes
// the output and a few 1×H×W maps (mean, maximum, their pair, the
// convolution, the norm, the gate), with about 3 FLOPs per input element
// (a sum, a comparison, a product) plus the convolution's 2 per MAC and 4
// per position for the sigmoid. Backward, with the input needing a
// gradient: the product's two gradients (3 FLOPs per element, reading the
// output's gradient and the input), the convolution's weight and input
// gradients (4 per MAC), the mean's and the maximum's gradients spread
// over the channels and added (2 per element); without, only the gate's
// side (the product's sum over the channels and the weight gradient).
func spatialGateWork(row *Row) Work {
	x, hw := elems(row.In), float64(row.In.H)*float64(row.In.W)
	maps := 6.0
	if row.Layer.GateNorm {
		maps = 7
	}
	m := 2 * float64(row.MACs)
	w := Work{Class: ClassMemory, FwdFLOPs: 3*x + m + 4*hw, FwdRead: 3*x + maps*hw, FwdWrite: x + maps*hw}
	if row.Grad {
		w.BwdFLOPs, w.BwdRead, w.BwdWrite = 5*x+2*m+4*hw, 4*x+maps*hw, 3*x+maps*hw
	} else {
		w.BwdFLOPs, w.BwdRead, w.BwdWrite = 2*x+m+4*hw, 2*x+maps*hw, maps*hw
	}
	return w
}
