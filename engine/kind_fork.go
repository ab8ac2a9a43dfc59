package engine

import "fmt"

// forkSpec is a set of parallel branches from one map whose outputs are
// joined along the channels (GoogLeNet's Inception modules, Szegedy et al.
// 2015; SqueezeNet's fire modules, Iandola et al. 2016; ShuffleNet V2's
// units, Ma et al. 2018, with input: split).
var forkSpec = Spec{
	Kind: KindFork, Key: "fork", Help: "parallel branches from one map, joined along the channels", Example: "fork copy",
	Main: &Param{Key: "input", Help: "copy (each branch reads the whole map) or split (each an equal share of its channels)",
		Type: TChoice, Choices: []string{"copy", "split"}, Optional: true,
		get: func(l *Layer) Value {
			if l.Split {
				return Value{Int: 1}
			}
			return Value{}
		},
		set: func(l *Layer, v Value) { l.Split = v.Int == 1 }},
	Body: true, Branches: true,
	eval: func(c *calc, f *flow) {
		if c.row.Role != RoleJoin {
			c.fail(Diagnostic{Code: ErrNesting, Field: "fork"}) // nested too deep to open
			return
		}
		c.join(f)
	},
	explain: func(row *Row) []string {
		return []string{fmt.Sprintf("out = the branches' outputs side by side along the channels: %d channels at %d×%d, 0 MACs",
			row.Out.C, row.Out.H, row.Out.W)}
	},
	// Concatenation keeps nothing for the backward pass: its gradient is
	// the incoming one cut into the branches' shares.
	torch: func(row *Row) Torch { return Torch{} },
}

// branchSpec is one branch of a fork. It is a row of its own only where it
// is misplaced (outside a fork).
var branchSpec = Spec{
	Kind: KindBranch, Key: "branch", Help: "one branch of a fork: its layers (none: the map itself)", Example: "branch",
	Bare: true, Body: true,
	eval: func(c *calc, f *flow) { c.fail(Diagnostic{Code: ErrBranchPlace, Field: "branch"}) },
}

// fork evaluates a fork item: each branch runs on the fork's input (or its
// share of the channels) and a join row concatenates their outputs. Rows
// are numbered item.branch.layer (5.2.1) and the join 5.join.
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
	var badBranch int
	var badShape Shape
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
		r.enter(lvl, share, false)
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
		case bf.shape.H != acc.shape.H || bf.shape.W != acc.shape.W:
			if badBranch == 0 {
				badBranch, badShape = b+1, bf.shape
			}
			acc.ok = false
		default:
			acc.shape.C += bf.shape.C
			acc.rf.H, acc.rf.W = max(acc.rf.H, bf.rf.H), max(acc.rf.W, bf.rf.W)
			acc.jump.H, acc.jump.W = max(acc.jump.H, bf.jump.H), max(acc.jump.W, bf.jump.W)
			acc.grad = acc.grad || bf.grad
			acc.store = bf.store
		}
	}
	r.forkCheck = forkCheck{empty: n == 0, splitBad: splitBad, channels: in.shape.C, branches: n,
		badBranch: badBranch, bad: badShape, first: acc.shape}
	r.other = *acc
	r.layer(l, &fp, SegJoin, f, false, RoleJoin)
}

// forkCheck is what the join row reports about its fork.
type forkCheck struct {
	empty, splitBad    bool
	channels, branches int64
	badBranch          int
	bad, first         Shape
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
