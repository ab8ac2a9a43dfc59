package engine

import (
	"fmt"
	"strings"
)

// forkSpec is a set of parallel branches from one map whose outputs are
// joined along the channels (GoogLeNet's Inception modules, Szegedy et al.
// 2015; SqueezeNet's fire modules, Iandola et al. 2016; ShuffleNet V2's
// units, Ma et al. 2018, with input: split) or, with join: add, summed
// (ResNet-D's downsampling shortcut, He et al. 2019; a feature pyramid's
// top-down merge, Lin et al. 2017, with a branch from a named output).
var forkSpec = Spec{
	Kind: KindFork, Key: "fork", Help: "parallel branches from one map, joined along the channels or added", Example: "fork copy",
	Main: &Param{Key: "input", Help: "copy (each branch reads the whole map) or split (each an equal share of its channels)",
		Type: TChoice, Choices: []string{"copy", "split"}, Optional: true,
		get: func(l *Layer) Value {
			if l.Split {
				return Value{Int: 1}
			}
			return Value{}
		},
		set: func(l *Layer, v Value) { l.Split = v.Int == 1 }},
	Params: []Param{{Key: "join", Help: "concat (the branches side by side along the channels) or add (summed; equal shapes)",
		Type: TChoice, Choices: []string{"concat", "add"}, Words: []string{"", "add"},
		get: func(l *Layer) Value {
			if l.JoinAdd {
				return Value{Int: 1}
			}
			return Value{}
		},
		set: func(l *Layer, v Value) { l.JoinAdd = v.Int == 1 }}},
	Body: true, Branches: true,
	eval: func(c *calc, f *flow) {
		if c.row.Role != RoleJoin {
			c.fail(Diagnostic{Code: ErrNesting, Field: "fork"}) // nested too deep to open
			return
		}
		c.join(f)
	},
	explain: func(row *Row) []string {
		if row.Layer.JoinAdd {
			return []string{fmt.Sprintf("out = the sum of the %d branches' outputs, element by element: %d channels at %d×%d, 0 MACs",
				len(row.Layer.Body), row.Out.C, row.Out.H, row.Out.W)}
		}
		return []string{fmt.Sprintf("out = the branches' outputs side by side along the channels: %d channels at %d×%d, 0 MACs",
			row.Out.C, row.Out.H, row.Out.W)}
	},
	// Time estimate of an additive join: n − 1 additions per element,
	// reading every branch's output once; the gradient reaches each branch
	// as the output's own (no backward kernel). A concatenating join
	// counts no work.
	work: func(row *Row) Work {
		n := float64(len(row.Layer.Body))
		if !row.Layer.JoinAdd || n < 1 {
			return Work{}
		}
		out := float64(elems(row.Out))
		return Work{Class: ClassMemory, FwdFLOPs: (n - 1) * out, FwdRead: n * out, FwdWrite: out}
	},
	// Neither join keeps anything for the backward pass: a concatenation's
	// gradient is the incoming one cut into the branches' shares, a sum's
	// is the incoming one for every branch.
	torch: func(row *Row) Torch { return Torch{} },
}

// JoinExpr returns the PyTorch expression that joins a fork's branch
// outputs, held in the variables outs: their sum for join: add, else
// their concatenation along the channels.
func JoinExpr(fork *Layer, outs []string) string {
	if fork.JoinAdd {
		return strings.Join(outs, " + ")
	}
	return "torch.cat([" + strings.Join(outs, ", ") + "], 1)"
}

// branchFromParam names the earlier output a branch starts from.
var branchFromParam = Param{Key: "from", Help: "name of an earlier layer or block the branch starts from (none: the fork's input)", Type: TRef,
	Label: "layer name", Want: "give the name of an earlier layer or block, or leave it empty for the fork's input", Optional: true, Quick: "from:",
	get: func(l *Layer) Value { return Value{Text: l.From} },
	set: func(l *Layer, v Value) { l.From = v.Text }}

// branchSpec is one branch of a fork. It is a row of its own only where it
// is misplaced (outside a fork).
var branchSpec = Spec{
	Kind: KindBranch, Key: "branch", Help: "one branch of a fork: its layers (none: the map itself), from the fork's input or a named earlier output", Example: "branch",
	Params: []Param{branchFromParam},
	Bare:   true, Body: true,
	eval: func(c *calc, f *flow) { c.fail(Diagnostic{Code: ErrBranchPlace, Field: "branch"}) },
}

// joinRead is one branch output a join row reads (for the step
// simulation: it stays alive until the join and receives a gradient
// there).
type joinRead struct {
	row, store int32
	grad       bool
}

// fork evaluates a fork item: each branch runs on the fork's input (or its
// share of the channels, or the named earlier output it starts from) and a
// join row concatenates or adds their outputs. Rows are numbered
// item.branch.layer (5.2.1) and the join 5.join.
func (r *Result) fork(l *Layer, parent Path, i int, f *flow, unstrided bool) {
	fp := parent
	fp.push(i)
	lvl := min(parent.Len()/2+1, len(r.forkIn)-1)
	in, acc, bf := &r.forkIn[lvl], &r.joined[lvl], &r.branch[lvl]
	*in = *f
	n := int64(len(l.Body))
	share := in.shape.C
	splitBad := false
	if l.Split && n > 0 && in.ok {
		if in.shape.C%n != 0 {
			splitBad = true
		}
		share = in.shape.C / n
	}
	acc.ok = in.ok && n > 0 && !splitBad
	started := false
	fc := forkCheck{empty: n == 0, splitBad: splitBad, channels: in.shape.C, branches: n}
	pend := &r.pending[lvl]
	*pend = (*pend)[:0]
	for b := range l.Body {
		br := &l.Body[b]
		bp := fp
		bp.push(b + 1)
		*bf = *in
		bf.ok = in.ok && !splitBad
		bf.shape.C = share // a split branch reads a view of its channels
		if br.Kind != KindBranch {
			// An item written directly in the fork: one error row.
			r.layer(br, &fp, seg(b+1), bf, unstrided, RoleLayer)
			r.failRow(len(r.Rows)-1, Diagnostic{Code: ErrBranchPlace, Field: "fork"}, bf)
			acc.ok = false
			continue
		}
		if br.From != "" {
			r.branchFrom(br, b+1, l.Split, bf, &fc)
		}
		r.enter(lvl, bf.shape.C, false)
		r.items(br.Body, bp, bf, unstrided)
		if br.Name != "" {
			r.setTap(br, bf)
		}
		switch {
		case !bf.ok:
			acc.ok = false
		case !started:
			ok := acc.ok
			*acc = *bf
			acc.ok, started = ok, true
			fc.first = bf.shape
		case bf.shape.H != acc.shape.H || bf.shape.W != acc.shape.W || l.JoinAdd && bf.shape.C != acc.shape.C:
			if fc.badBranch == 0 {
				fc.badBranch, fc.bad = b+1, bf.shape
			}
			acc.ok = false
		default:
			if !l.JoinAdd {
				acc.shape.C += bf.shape.C
			}
			acc.rf.H, acc.rf.W = max(acc.rf.H, bf.rf.H), max(acc.rf.W, bf.rf.W)
			acc.jump.H, acc.jump.W = max(acc.jump.H, bf.jump.H), max(acc.jump.W, bf.jump.W)
			acc.grad = acc.grad || bf.grad
			acc.store = bf.store
		}
		if bf.ok {
			*pend = append(*pend, joinRead{store: bf.store, grad: bf.grad})
		}
	}
	fc.add = l.JoinAdd
	r.forkCheck = fc
	r.other = *acc
	row := int32(len(r.Rows))
	r.layer(l, &fp, SegJoin, f, false, RoleJoin)
	// The join reads every branch's output: recorded in row order, after
	// the joins of any fork nested in a branch.
	for _, j := range r.pending[lvl] {
		j.row = row
		r.joins = append(r.joins, j)
	}
}

// branchFrom points a branch's flow at the named earlier output it starts
// from, or marks it unresolved with the reason in fc (the join row reports
// it).
func (r *Result) branchFrom(br *Layer, b int, split bool, bf *flow, fc *forkCheck) {
	t, ok := r.taps[br.From]
	d := Diagnostic{Code: ErrBranchFrom, Field: "from", Name: br.From, E: int64(b)}
	switch {
	case split:
		d.Code = ErrBranchFromSplit
	case !ok && r.stack != nil && hasName(r.stack.Layers, br.From):
		d.A = 1 // a later output
	case !ok:
		d.Hint = r.closestTap(br.From)
	default:
		ok := bf.ok
		*bf = t.f
		bf.ok = bf.ok && ok
		return
	}
	if fc.from.Code == 0 {
		fc.from = d
	}
	bf.ok = false
}

// forkCheck is what the join row reports about its fork.
type forkCheck struct {
	empty, splitBad    bool
	add                bool // join: add
	channels, branches int64
	badBranch          int
	bad, first         Shape
	from               Diagnostic // a branch's from: that names no usable output
}

// join applies the branches the fork left in r.other to the flow.
func (c *calc) join(f *flow) {
	fc := &c.r.forkCheck
	switch {
	case fc.empty:
		c.fail(Diagnostic{Code: ErrForkEmpty, Field: "branches"})
		return
	case fc.splitBad:
		c.fail(Diagnostic{Code: ErrSplitWidth, Field: "input", A: fc.channels, B: fc.branches})
		return
	case fc.from.Code != 0:
		c.fail(fc.from)
		return
	case fc.badBranch > 0 && fc.add && (fc.bad.H != fc.first.H || fc.bad.W != fc.first.W):
		c.fail(Diagnostic{Code: ErrJoinShape, Field: "size", A: fc.bad.H, B: fc.bad.W, C: fc.first.H, D: fc.first.W, E: int64(fc.badBranch)})
		return
	case fc.badBranch > 0 && fc.add:
		c.fail(Diagnostic{Code: ErrJoinShape, Field: "channels", A: fc.bad.C, B: fc.first.C, E: int64(fc.badBranch)})
		return
	case fc.badBranch > 0:
		c.fail(Diagnostic{Code: ErrBranchShape, Field: "branches", A: fc.bad.H, B: fc.bad.W, C: fc.first.H, D: fc.first.W, E: int64(fc.badBranch)})
		return
	}
	g := c.r.other
	if !g.ok {
		c.unresolved = true
		return
	}
	if fc.branches == 1 {
		c.warn(Diagnostic{Code: WarnForkOne, Field: "branches"})
	}
	if g.shape.C > MaxChannels {
		c.fail(Diagnostic{Code: ErrOverflow, Field: "channels"})
		return
	}
	c.row.Out = g.shape
	c.row.OtherStore, c.row.OtherGrad = g.store, g.grad
	f.rf, f.jump = g.rf, g.jump
	f.grad = f.grad || g.grad
}
