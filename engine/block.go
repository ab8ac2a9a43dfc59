package engine

import (
	"maps"
	"math"
	"slices"
)

// MaxBlockDepth is how deeply blocks may nest (paths hold item and repeat
// numbers for each level).
const MaxBlockDepth = 3

// tap is what a named layer or block leaves for later merges.
type tap struct {
	layer *Layer
	row   int // the row that produced it (for blocks, the last row)
	f     flow
}

// setTap records the current flow under l's name. A name seen again from
// the same layer (a later repeat of a block) moves to the latest output.
func (r *Result) setTap(l *Layer, f *flow) {
	if old, ok := r.taps[l.Name]; ok && old.layer != l {
		first := "an earlier item"
		if old.row >= 0 && old.row < len(r.Rows) {
			first = r.Rows[old.row].Path.String()
		}
		r.diag(Diagnostic{Severity: SevError, Code: ErrNameTwice, Row: len(r.Rows) - 1, Name: l.Name, Field: first})
		f.ok = false
		return
	}
	r.taps[l.Name] = tap{layer: l, row: len(r.Rows) - 1, f: *f}
}

// fixedLayers are the layers residual blocks add that never vary: one
// copy each per Result, shared by every row that uses them.
type fixedLayers struct {
	add  Layer
	cat  Layer
	norm Layer
	act  [len(activations)]Layer
	// defaulted: norm and act hold a stack's defaults.
	defaulted bool
}

// init sets the layers up for a stack with defaults d: the shortcut's norm
// and the activations after an addition take the stack's defaults as the
// written layers do.
func (x *fixedLayers) init(d Defaults) {
	if x.add.Kind == KindAdd && len(d) == 0 && !x.defaulted {
		return
	}
	x.add = Layer{Kind: KindAdd}
	x.cat = Layer{Kind: KindConcat}
	x.norm = d.Resolve(&Layer{Kind: KindNorm, Norm: NormBatch})
	for i := range x.act {
		x.act[i] = d.Resolve(&Layer{Kind: KindAct, Act: ActKind(i)})
	}
	x.defaulted = len(d) > 0
}

// synthPool hands out the layers residual blocks add (projection shortcuts,
// additions, activations). Layers live in fixed-size chunks so that the
// pointers rows keep stay valid while more are added; chunks are reused by
// the next evaluation.
type synthPool struct {
	chunks [][]Layer
	n      int // layers handed out
}

const synthChunk = 16

func (p *synthPool) reset() { p.n = 0 }

// projection hands out a 1×1 shortcut convolution.
func (p *synthPool) projection(filters int64, stride Pair, noBias bool) *Layer {
	c, i := p.n/synthChunk, p.n%synthChunk
	if c == len(p.chunks) {
		p.chunks = append(p.chunks, make([]Layer, synthChunk))
	}
	p.n++
	l := &p.chunks[c][i]
	l.Kind, l.Filters, l.Kernel, l.Stride, l.NoBias = KindConv, filters, Square(1), stride, noBias
	return l
}

// dropPathAdd hands out the addition of a residual block with stochastic
// depth: an add whose Rate is the drop probability of the body's branch.
func (p *synthPool) dropPathAdd(rate float64) *Layer {
	c, i := p.n/synthChunk, p.n%synthChunk
	if c == len(p.chunks) {
		p.chunks = append(p.chunks, make([]Layer, synthChunk))
	}
	p.n++
	l := &p.chunks[c][i]
	*l = Layer{Kind: KindAdd, Rate: rate}
	return l
}

// gate evaluates a gate item: its body runs on a copy of the flow and
// must end in a C×1×1 map, which a multiplication row then applies to the
// flow channel by channel (squeeze-and-excitation, Hu et al. 2018). The
// rows are numbered like a block's single repeat: 5.1.1 … 5.1.mul.
func (r *Result) gate(l *Layer, parent Path, i int, f *flow, unstrided bool) {
	gp := parent
	gp.push(i)
	gp.push(1)
	lvl := min(gp.Len()/2, len(r.gates)-1)
	g := &r.gates[lvl]
	*g = *f
	r.enter(lvl, f.shape.C, false)
	r.items(l.Body, gp, g, unstrided)
	r.other = *g
	r.layer(l, &gp, SegGateMul, f, false, RoleGate)
}

// enter records the input channels of a body opened at level lvl, for the
// relative widths inside it: a block repeat's input is also the block
// reference; a gate or branch inherits the enclosing one.
func (r *Result) enter(lvl int, c int64, block bool) {
	if lvl <= 0 || lvl >= len(r.ref) {
		return
	}
	r.ref[lvl] = c
	if block {
		r.blockRef[lvl] = c
	} else {
		r.blockRef[lvl] = r.blockRef[lvl-1]
	}
}

// countRows returns how many rows ls expands to — the real number, so that
// a refusal can state it — saturating only at the largest int64.
func countRows(ls []Layer, depth int) int64 {
	var n int64
	var ov bool
	for i := range ls {
		l := &ls[i]
		switch l.Kind {
		case KindGate:
			n = add(&ov, n, add(&ov, countRows(l.Body, depth+1), 1)) // the body and the multiplication
		case KindFork:
			n = add(&ov, n, 1) // the join
			for j := range l.Body {
				if l.Body[j].Kind == KindBranch {
					n = add(&ov, n, countRows(l.Body[j].Body, depth+1))
				} else {
					n = add(&ov, n, 1) // a misplaced item: one error row
				}
			}
		case KindBlock:
			per := countRows(l.Body, depth+1)
			if l.Residual {
				per = add(&ov, per, 4) // shortcut, its norm, the addition, the activation
			}
			if l.DenseLinks {
				per = add(&ov, per, 1) // the concatenation
			}
			n = add(&ov, n, mul(&ov, per, max(l.Repeat, 1)))
		default:
			n = add(&ov, n, 1)
		}
		if ov {
			return math.MaxInt64
		}
	}
	return n
}

// block evaluates every repeat of a block. Its body is written as the first
// repeat; unless AllStrides is set, later repeats run with every stride set
// to 1, so only the first repeat changes the resolution (and, through its
// filters, the width).
func (r *Result) block(l *Layer, parent Path, i int, f *flow, unstrided bool) {
	bp := parent
	bp.push(i)
	reps := max(l.Repeat, 1)
	for rep := int64(1); rep <= reps; rep++ {
		rp := bp
		rp.push(int(rep))
		var in flow
		if l.Residual || l.DenseLinks {
			in = *f
		}
		r.enter(rp.Len()/2, f.shape.C, true)
		r.items(l.Body, rp, f, unstrided || (rep > 1 && !l.AllStrides))
		if l.Residual {
			r.residual(l, &rp, &in, f)
		}
		if l.DenseLinks {
			r.shortcut = in
			r.layer(&r.fixed.cat, &rp, SegDenseCat, f, false, RoleDenseCat)
		}
	}
}

// residual closes one repeat of a residual block: output = body(x) +
// shortcut(x). The shortcut is the identity when shapes match; otherwise a
// 1×1 convolution with the repeat's total stride (the projection shortcut,
// option B of He et al. 2016), followed by batch norm unless NoShortcutNorm.
func (r *Result) residual(l *Layer, p *Path, in *flow, f *flow) {
	// The shortcut flow lives in the Result: nothing runs between the
	// shortcut rows and the addition that could need a second one.
	sc := &r.shortcut
	*sc = *in
	if in.ok && f.ok && in.shape != f.shape && l.IdentityOnly {
		// An inverted residual adds its input only where the shapes match.
		if l.HasPostAct && int(l.PostAct) < len(r.fixed.act) {
			r.layer(&r.fixed.act[l.PostAct], p, SegPostAct, f, false, RolePostAct)
		}
		return
	}
	if in.ok && f.ok && in.shape != f.shape {
		sh := math.Round(f.jump.H / in.jump.H)
		sw := math.Round(f.jump.W / in.jump.W)
		if sh < 1 || sw < 1 || math.IsNaN(sh) || math.IsNaN(sw) {
			r.layer(&r.fixed.add, p, SegResidualAdd, f, false, RoleResidual)
			row := len(r.Rows) - 1
			r.failRow(row, Diagnostic{Code: ErrProjection, Field: "residual", A: f.shape.H, B: f.shape.W, C: in.shape.H, D: in.shape.W}, f)
			return
		}
		conv := r.synth.projection(f.shape.C, Pair{int64(sh), int64(sw)}, !l.NoShortcutNorm)
		r.layer(conv, p, SegShortcut, sc, false, RoleShortcut)
		if !l.NoShortcutNorm {
			r.layer(&r.fixed.norm, p, SegShortcutNorm, sc, false, RoleShortcut)
		}
	}
	add := &r.fixed.add
	if l.DropPath > 0 {
		add = r.synth.dropPathAdd(l.DropPath)
	}
	r.layer(add, p, SegResidualAdd, f, false, RoleResidual)
	if l.HasPostAct && int(l.PostAct) < len(r.fixed.act) {
		r.layer(&r.fixed.act[l.PostAct], p, SegPostAct, f, false, RolePostAct)
	}
}

// failRow turns an already computed row into an error row.
func (r *Result) failRow(row int, d Diagnostic, f *flow) {
	d.Severity, d.Row = SevError, row
	r.diag(d)
	rw := &r.Rows[row]
	if rw.Status == StatusOK {
		r.Totals.Params -= rw.Params
		r.Totals.Buffers -= rw.Buffers
		r.Totals.MACs -= rw.MACs
	}
	rw.Status, rw.Out, rw.Params, rw.Buffers, rw.MACs = StatusError, Shape{}, 0, 0, 0
	f.ok = false
}

// merge joins the flow with a named earlier output (concat, add) or, for
// the addition that closes a residual repeat, with the shortcut.
func (c *calc) merge(f *flow) {
	l := c.l
	var other flow
	name := l.From
	if c.row.Role == RoleResidual || c.row.Role == RoleDenseCat {
		other, name = c.r.shortcut, ""
	} else {
		t, ok := c.r.taps[name]
		if !ok {
			code := ErrMergeUnknown
			if c.r.stack != nil && hasName(c.r.stack.Layers, name) {
				code = ErrMergeLater
			}
			d := Diagnostic{Code: code, Field: l.Kind.String(), Name: name}
			if code == ErrMergeUnknown {
				d.Hint = c.r.closestTap(name)
			}
			c.fail(d)
			return
		}
		other = t.f
	}
	if !other.ok {
		c.unresolved = true
		return
	}
	cur := f.shape
	out := cur
	if other.shape.H != cur.H || other.shape.W != cur.W {
		if c.row.Role == RoleDenseCat {
			c.fail(Diagnostic{Code: ErrDenseShape, Field: "dense-links", A: cur.H, B: cur.W, C: other.shape.H, D: other.shape.W})
			return
		}
		if !l.Crop {
			c.fail(Diagnostic{Code: ErrMergeShape, Field: "crop", Name: name, A: other.shape.H, B: other.shape.W, C: cur.H, D: cur.W})
			return
		}
		out.H, out.W = min(cur.H, other.shape.H), min(cur.W, other.shape.W)
		if other.shape.H > out.H || other.shape.W > out.W {
			c.note(Diagnostic{Code: InfoCrop, Field: "skip", Name: name, A: other.shape.H, B: other.shape.W, C: out.H, D: out.W})
		}
		if cur.H > out.H || cur.W > out.W {
			c.note(Diagnostic{Code: InfoCrop, Field: "here", Name: name, A: cur.H, B: cur.W, C: out.H, D: out.W})
		}
	}
	if l.Kind == KindConcat {
		out.C = add(&c.ov, cur.C, other.shape.C)
		if !c.checkOverflow("channels") {
			return
		}
	} else if other.shape.C != cur.C {
		c.fail(Diagnostic{Code: ErrAddChannels, Field: "channels", Name: name, A: other.shape.C, B: cur.C})
		return
	}
	if other.jump != f.jump && other.jump.H > 0 && f.jump.H > 0 {
		c.warn(Diagnostic{Code: WarnMergeJump, Field: "jump", Name: name, A: int64(other.jump.H * 1e6), B: int64(f.jump.H * 1e6)})
	}
	c.row.Out = out
	c.row.OtherStore = other.store
	f.grad = f.grad || other.grad
	f.rf.H, f.rf.W = max(f.rf.H, other.rf.H), max(f.rf.W, other.rf.W)
}

//go:noinline
func (c *calc) note(d Diagnostic) {
	d.Severity = SevInfo
	d.Row = c.idx
	c.r.diag(d)
}

// hasName reports whether any layer in ls (blocks included) is named name.
func hasName(ls []Layer, name string) bool {
	for i := range ls {
		if ls[i].Name == name || hasName(ls[i].Body, name) {
			return true
		}
	}
	return false
}

// closestTap returns the earlier output's name that name is likely a slip
// for (Suggest, over the names seen so far), or "". It runs only on the
// error path.
func (r *Result) closestTap(name string) string {
	return Suggest(name, slices.Sorted(maps.Keys(r.taps))) // sorted: ties resolve the same way every time
}
