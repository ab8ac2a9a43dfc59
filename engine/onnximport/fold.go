package onnximport

import (
	"strconv"
	"strings"

	"stackfit/engine"
)

// folder folds repeated units into blocks with repeat counts and writes
// the widths that change from repeat to repeat relative to an input. It
// reads every layer's shapes from one evaluation of the unfolded items.
type folder struct {
	in, out map[*item]engine.Shape // a layer's input and output in the unfolded stack
	reps    map[*item][][]*item    // a folded block: the body of every repeat, the first being its own
	plain   map[*item]bool         // a run of plain layers wrapped as a candidate first repeat
	group   map[*item]string       // a one-unit stage: the module it was read from
	ref     *engine.Result         // the unfolded stack's evaluation
}

// maxPeriod is the longest unit, in items, that folding looks for.
const maxPeriod = 12

// newFolder evaluates the unfolded items of stack s.
func newFolder(s *engine.Stack, items []*item) *folder {
	f := &folder{in: map[*item]engine.Shape{}, out: map[*item]engine.Shape{}, reps: map[*item][][]*item{},
		plain: map[*item]bool{}, group: map[*item]string{}}
	m := map[*engine.Layer]*item{}
	tmp := map[*item]string{}
	var names func([]*item)
	names = func(its []*item) {
		for _, it := range its {
			if it.tap {
				tmp[it] = "t" + strconv.Itoa(len(tmp)+1)
			}
			names(it.kids)
		}
	}
	names(items)
	ls := layersOf(items, m, tmp)
	f.ref = engine.Evaluate(&engine.Stack{Input: s.Input, Layers: ls})
	for i := range f.ref.Rows {
		row := &f.ref.Rows[i]
		if row.Role != engine.RoleLayer {
			continue
		}
		if it, ok := m[row.Layer]; ok {
			if _, seen := f.in[it]; !seen {
				f.in[it], f.out[it] = row.In, row.Out
			}
		}
	}
	return f
}

// layersOf builds the layers of items, recording which item each came
// from and naming the merged outputs by tmp.
func layersOf(its []*item, m map[*engine.Layer]*item, tmp map[*item]string) []engine.Layer {
	if len(its) == 0 {
		return nil
	}
	ls := make([]engine.Layer, len(its))
	for i, it := range its {
		ls[i] = it.l
		l := &ls[i]
		switch l.Kind {
		case engine.KindBlock, engine.KindGate, engine.KindFork, engine.KindBranch:
			l.Body = layersOf(it.kids, m, tmp)
		}
		if it.from != nil { // a named concatenation, or a branch from a named output
			l.From = tmp[it.from]
		}
		l.Name = tmp[it]
		m[l] = it
	}
	return ls
}

// sameRows reports whether stack ls computes what the unfolded items do:
// every convolution, dense and norm row with the same shapes, parameters
// and MACs, in order.
func (f *folder) sameRows(s *engine.Stack, ls []engine.Layer) bool {
	r := engine.Evaluate(&engine.Stack{Input: s.Input, Layers: ls})
	if r.Errors > f.ref.Errors || r.Totals != f.ref.Totals {
		return false
	}
	key := func(res *engine.Result) []engine.Row {
		var rows []engine.Row
		for _, row := range res.Rows {
			switch row.Layer.Kind {
			case engine.KindConv, engine.KindDeconv, engine.KindDense, engine.KindNorm:
				rows = append(rows, engine.Row{In: row.In, Out: row.Out, Params: row.Params, Buffers: row.Buffers, MACs: row.MACs, Role: row.Role})
			}
		}
		return rows
	}
	a, b := key(f.ref), key(r)
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i].In != b[i].In || a[i].Out != b[i].Out || a[i].Params != b[i].Params || a[i].Buffers != b[i].Buffers || a[i].MACs != b[i].MACs || a[i].Role != b[i].Role {
			return false
		}
	}
	return true
}

func isConstruct(k engine.Kind) bool {
	return k == engine.KindBlock || k == engine.KindGate || k == engine.KindFork || k == engine.KindBranch
}

// firstIn is the input of the first layer read in its, if known.
func (f *folder) firstIn(its []*item) (engine.Shape, bool) {
	for _, it := range its {
		if isConstruct(it.l.Kind) {
			if s, ok := f.firstIn(it.kids); ok {
				return s, true
			}
			continue
		}
		s, ok := f.in[it]
		return s, ok
	}
	return engine.Shape{}, false
}

// depthwise reports whether a convolution has one group per input channel.
func (f *folder) depthwise(it *item) bool {
	l := &it.l
	return l.Kind == engine.KindConv && (l.Depthwise || l.Groups > 1 && l.Groups == f.in[it].C)
}

// match reports whether b has a's structure; widths and strides are
// checked apart.
func (f *folder) match(a, b *item) bool {
	if a.l.Kind != b.l.Kind || a.tap || b.tap {
		return false
	}
	x, y := a.l, b.l
	switch x.Kind {
	case engine.KindBlock:
		if max(x.Repeat, 1) != max(y.Repeat, 1) || x.DenseLinks != y.DenseLinks || x.Residual != y.Residual ||
			x.IdentityOnly != y.IdentityOnly || x.HasPostAct != y.HasPostAct || x.PostAct != y.PostAct ||
			x.NoShortcutNorm != y.NoShortcutNorm || x.AllStrides != y.AllStrides || b.projection && !a.projection {
			return false
		}
		return f.matchList(a.kids, b.kids)
	case engine.KindGate, engine.KindBranch:
		return a.from == nil && b.from == nil && f.matchList(a.kids, b.kids)
	case engine.KindFork:
		return x.Split == y.Split && x.JoinAdd == y.JoinAdd && f.matchList(a.kids, b.kids)
	}
	if x.Kind.IsMerge() {
		return false
	}
	return engine.EqualLayers([]engine.Layer{f.shape(a)}, []engine.Layer{f.shape(b)})
}

// shape is a layer without what folding decides apart: width, stride,
// name, and groups when they follow the input.
func (f *folder) shape(it *item) engine.Layer {
	l := it.l
	l.Filters, l.Rel, l.RoundTo, l.RelBlock, l.RelInput, l.Stride, l.Name = 0, engine.Rel{}, 0, false, false, engine.Pair{}, ""
	if f.depthwise(it) {
		l.Groups, l.Depthwise = 0, true
	}
	return l.Normalized()
}

func (f *folder) matchList(a, b []*item) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if !f.match(a[i], b[i]) {
			return false
		}
	}
	return true
}

// repsOf lists a block's repeat bodies: those folded into it, else its
// body as many times as it repeats.
func (f *folder) repsOf(it *item) [][]*item {
	if r, ok := f.reps[it]; ok {
		return r
	}
	n := max(it.l.Repeat, 1)
	r := make([][]*item, n)
	for i := range r {
		r[i] = it.kids
	}
	return r
}

// strides lists the strides of its' convolutions and poolings as read.
func (f *folder) strides(its []*item, out []engine.Pair) []engine.Pair {
	for _, it := range its {
		switch it.l.Kind {
		case engine.KindBlock:
			for _, rep := range f.repsOf(it) {
				out = f.strides(rep, out)
			}
		case engine.KindGate, engine.KindFork, engine.KindBranch:
			out = f.strides(it.kids, out)
		case engine.KindConv, engine.KindDeconv, engine.KindPool:
			out = append(out, it.l.EffectiveStride())
		}
	}
	return out
}

// model lists the strides the stack file's rule gives its: a block's
// later repeats run with stride 1 unless its strides apply to all.
func (f *folder) model(its []*item, unstrided bool, out []engine.Pair) []engine.Pair {
	for _, it := range its {
		switch it.l.Kind {
		case engine.KindBlock:
			for k := int64(0); k < max(it.l.Repeat, 1); k++ {
				out = f.model(it.kids, unstrided || k > 0 && !it.l.AllStrides, out)
			}
		case engine.KindGate, engine.KindFork, engine.KindBranch:
			out = f.model(it.kids, unstrided, out)
		case engine.KindConv, engine.KindDeconv, engine.KindPool:
			if unstrided {
				out = append(out, engine.Square(1))
			} else {
				out = append(out, it.l.EffectiveStride())
			}
		}
	}
	return out
}

// place is one weighted layer of a body with the inputs its width may
// be relative to.
type place struct {
	path          string
	it            *item
	body, blockIn int64
}

// places lists the weighted layers of its, nested repeats included.
func (f *folder) places(its []*item, body, blockIn int64, path string, out []place) []place {
	for i, it := range its {
		p := path + "." + strconv.Itoa(i)
		switch it.l.Kind {
		case engine.KindBlock:
			for _, rep := range f.repsOf(it) {
				in, _ := f.firstIn(rep)
				out = f.places(rep, in.C, in.C, p+"b", out)
			}
		case engine.KindGate:
			in, _ := f.firstIn(it.kids)
			out = f.places(it.kids, in.C, blockIn, p+"g", out)
		case engine.KindFork:
			for bi, br := range it.kids {
				in, _ := f.firstIn(br.kids)
				out = f.places(br.kids, in.C, blockIn, p+"f"+strconv.Itoa(bi), out)
			}
		default:
			if it.l.Kind.HasWeights() {
				out = append(out, place{p, it, body, blockIn})
			}
		}
	}
	return out
}

// width is how a position's width is written.
type width struct {
	abs   int64 // absolute, when rel is zero
	rel   engine.Rel
	round int64
	block bool // relative to the enclosing block repeat's input
	input bool // relative to the layer's own input
}

// choice is a width for the representative layer of a position.
type choice struct {
	it        *item
	w         width
	depthwise bool // written as groups: depthwise (the groups change with the input)
}

var (
	relMuls = []float64{1, 2, 3, 4, 6, 8, 5, 7, 16}
	relDivs = []int64{2, 3, 4, 6, 8, 16}
)

// widths chooses, for every weighted position of the bodies, the
// absolute width where all instances agree, else the first relative
// width that gives every instance's (by the engine's own resolution).
func (f *folder) widths(bodies [][]*item) ([]choice, bool) {
	var order []string
	byPath := map[string][]place{}
	for _, body := range bodies {
		in, _ := f.firstIn(body)
		for _, p := range f.places(body, in.C, in.C, "", nil) {
			if _, ok := byPath[p.path]; !ok {
				order = append(order, p.path)
			}
			byPath[p.path] = append(byPath[p.path], p)
		}
	}
	var cs []choice
	for _, path := range order {
		ps := byPath[path]
		c := choice{it: ps[0].it}
		want := func(p place) int64 { return f.out[p.it].C }
		same, dw, groups := true, true, true
		for _, p := range ps {
			same = same && want(p) == want(ps[0])
			dw = dw && f.depthwise(p.it)
			groups = groups && p.it.l.Groups == ps[0].it.l.Groups && p.it.l.Depthwise == ps[0].it.l.Depthwise
		}
		c.depthwise = dw && !groups
		if same {
			c.w.abs = want(ps[0])
			cs = append(cs, c)
			continue
		}
		if dw && f.inputWidth(ps) {
			// A depthwise convolution after a width change reads best as
			// "as wide as its input" (x1, relative-to: input).
			c.w = width{rel: engine.Rel{Mul: 1}, input: true}
			cs = append(cs, c)
			continue
		}
		found := false
		for _, block := range []bool{false, true} {
			for _, round := range []int64{0, 8} {
				var rels []engine.Rel
				for _, k := range relMuls {
					rels = append(rels, engine.Rel{Mul: k})
				}
				for _, d := range relDivs {
					rels = append(rels, engine.Rel{Div: d})
				}
				for _, rel := range rels {
					ok := true
					for _, p := range ps {
						in := p.body
						if block {
							in = p.blockIn
						}
						if in < 1 || engine.ResolveWidth(0, rel, round, in) != want(p) {
							ok = false
							break
						}
					}
					if ok {
						c.w, found = width{rel: rel, round: round, block: block}, true
						break
					}
				}
				if found {
					break
				}
			}
			if found {
				break
			}
		}
		if !found {
			return nil, false
		}
		cs = append(cs, c)
	}
	return cs, true
}

// inputWidth reports whether every instance of a position is as wide as
// its own input and not every one as wide as its body's input (where x1
// of the body reads as well).
func (f *folder) inputWidth(ps []place) bool {
	body := true
	for _, p := range ps {
		in, out := f.in[p.it].C, f.out[p.it].C
		if in < 1 || out != in {
			return false
		}
		body = body && p.body == in
	}
	return !body
}

// apply writes the chosen widths into the representative layers.
func apply(cs []choice) {
	for _, c := range cs {
		l := &c.it.l
		if c.w.rel.IsZero() {
			l.Filters, l.Rel, l.RoundTo, l.RelBlock, l.RelInput = c.w.abs, engine.Rel{}, 0, false, false
		} else {
			l.Rel, l.RoundTo, l.RelBlock, l.RelInput = c.w.rel, c.w.round, c.w.block, c.w.input
		}
		if c.depthwise {
			l.Groups, l.Depthwise = 0, true
		}
	}
}

// nesting is how deep constructs nest inside its.
func nesting(its []*item) int {
	n := 0
	for _, it := range its {
		d := nesting(it.kids)
		switch it.l.Kind {
		case engine.KindBlock, engine.KindGate, engine.KindFork:
			d++
		}
		n = max(n, d)
	}
	return n
}

func structured(its []*item) bool {
	for _, it := range its {
		if isConstruct(it.l.Kind) {
			return true
		}
	}
	return false
}

// hasMerge reports whether a merge by name is among its.
func hasMerge(its []*item) bool {
	for _, it := range its {
		if it.l.Kind.IsMerge() || it.tap || it.from != nil || hasMerge(it.kids) {
			return true
		}
	}
	return false
}

// unitOK reports whether unit may start a fold: it starts with a
// weighted layer or a construct, holds a construct, holds no folded
// block and no merge by name.
func (f *folder) unitOK(unit []*item) bool {
	if !unit[0].l.Kind.HasWeights() && !isConstruct(unit[0].l.Kind) || hasMerge(unit) {
		return false
	}
	for _, u := range unit {
		if _, folded := f.reps[u]; u.l.Kind == engine.KindBlock && (u.l.Repeat > 1 || folded) {
			return false
		}
	}
	return structured(unit) || f.plain[unit[0]]
}

// fold folds the repeats in items, bodies first; depth is how many
// constructs enclose them.
func (f *folder) fold(items []*item, depth int) []*item {
	for _, it := range items {
		switch it.l.Kind {
		case engine.KindBlock, engine.KindGate:
			it.kids = f.fold(it.kids, depth+1)
		case engine.KindFork:
			for _, br := range it.kids {
				br.kids = f.fold(br.kids, depth+1)
			}
		}
	}
	L := append([]*item(nil), items...)
	// A plain run equal to the next identity-residual block's body but
	// changing the shape may be that block's first repeat.
	for j := 0; j < len(L); j++ {
		it := L[j]
		l := &it.l
		if l.Kind != engine.KindBlock || !l.Residual || l.Repeat > 1 || it.projection || l.HasPostAct || l.DenseLinks || it.tap {
			continue
		}
		k := len(it.kids)
		if k == 0 || j-k < 0 {
			continue
		}
		run := append([]*item(nil), L[j-k:j]...)
		okRun := true
		for _, x := range run {
			okRun = okRun && x.l.Kind != engine.KindBlock && !x.tap
		}
		if !okRun || !f.matchList(run, it.kids) || isConstruct(run[k-1].l.Kind) {
			continue
		}
		in, ok1 := f.firstIn(run)
		out, ok2 := f.out[run[k-1]]
		changes := false
		for _, s := range f.strides(run, nil) {
			changes = changes || s != engine.Square(1)
		}
		if !ok1 || !ok2 || in == out && !changes {
			continue
		}
		pb := &item{l: engine.Layer{Kind: engine.KindBlock}, kids: run}
		f.plain[pb] = true
		L = append(append(append([]*item(nil), L[:j-k]...), pb), L[j:]...)
		j = j - k + 1
	}
	for k := 1; k <= maxPeriod; k++ {
		var out []*item
		for i := 0; i < len(L); {
			if i+2*k <= len(L) && f.unitOK(L[i:i+k]) {
				if r, blk := f.try(L, i, k, depth); blk != nil {
					out = append(out, blk)
					i += r * k
					continue
				}
			}
			out = append(out, L[i])
			i++
		}
		L = out
	}
	var out []*item
	for _, it := range L {
		if f.plain[it] {
			out = append(out, it.kids...) // a plain run that found no repeats stays plain
		} else {
			out = append(out, it)
		}
	}
	return out
}

// try folds the longest run of repeats of L[i:i+k] that builds a block.
func (f *folder) try(L []*item, i, k, depth int) (int, *item) {
	unit := L[i : i+k]
	r, best, bestR := 1, (*item)(nil), 1
	var cs []choice
	for i+(r+1)*k <= len(L) {
		cand := L[i+r*k : i+(r+1)*k]
		var ok bool
		if k == 1 && f.plain[unit[0]] {
			c := cand[0]
			ok = c.l.Kind == engine.KindBlock && c.l.Residual && c.l.Repeat <= 1 && !c.l.HasPostAct && !c.projection &&
				!c.l.IdentityOnly && !c.l.DenseLinks && f.matchList(unit[0].kids, c.kids)
		} else {
			ok = f.matchList(unit, cand)
		}
		if !ok {
			break
		}
		r++
		if blk, c := f.build(L[i:i+r*k], k, r, depth); blk != nil {
			best, bestR, cs = blk, r, c
		}
	}
	if best != nil {
		apply(cs)
	}
	return bestR, best
}

// build makes the block of r repeats of k items each, or nil where the
// widths or strides have no block form.
func (f *folder) build(run []*item, k, r, depth int) (*item, []choice) {
	insts := make([][]*item, r)
	for j := range insts {
		insts[j] = run[j*k : (j+1)*k]
	}
	u := insts[0][0]
	blk := &item{l: engine.Layer{Kind: engine.KindBlock, Repeat: int64(r)}}
	var bodies [][]*item
	switch {
	case k == 1 && u.l.Kind == engine.KindBlock && u.l.Repeat <= 1 && (u.l.Residual || f.plain[u]):
		for _, in := range insts {
			bodies = append(bodies, in[0].kids)
		}
		if f.plain[u] {
			blk.l.Residual, blk.l.IdentityOnly = true, true
		} else {
			blk.l.Residual, blk.l.IdentityOnly, blk.l.HasPostAct, blk.l.PostAct = true, u.l.IdentityOnly, u.l.HasPostAct, u.l.PostAct
			blk.l.NoShortcutNorm, blk.projection = u.l.NoShortcutNorm, u.projection
		}
	case k == 1 && u.l.Kind == engine.KindBlock && u.l.Repeat <= 1 && u.l.DenseLinks:
		for _, in := range insts {
			bodies = append(bodies, in[0].kids)
		}
		blk.l.DenseLinks = true
	default:
		bodies = insts
	}
	if depth+1+nesting(bodies[0]) > engine.MaxBlockDepth {
		return nil, nil
	}
	cs, ok := f.widths(bodies)
	if !ok {
		return nil, nil
	}
	blk.kids = bodies[0]
	f.reps[blk] = bodies
	var act []engine.Pair
	for _, b := range bodies {
		act = f.strides(b, act)
	}
	if !equalPairs(f.model([]*item{blk}, false, nil), act) {
		blk.l.AllStrides = true
		if !equalPairs(f.model([]*item{blk}, false, nil), act) {
			delete(f.reps, blk)
			return nil, nil
		}
	}
	for _, x := range run {
		blk.nodes = append(blk.nodes, allNodes(x)...)
	}
	blk.out = run[len(run)-1].out
	return blk, cs
}

func equalPairs(a, b []engine.Pair) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// modulePrefix is the first two parts of a node's module path
// ("/features/features.1/conv/…" → features/features.1), or "".
func modulePrefix(name string) string {
	parts := strings.FieldsFunc(name, func(r rune) bool { return r == '/' })
	if len(parts) <= 2 {
		return ""
	}
	return parts[0] + "/" + parts[1]
}

// groupModules wraps a run of top-level items read from one module and
// holding two or more weighted layers as a block of one repeat: what a
// person writes for a stage of one unit.
func (f *folder) groupModules(b *builder, items []*item) []*item {
	prefix := func(it *item) string {
		ns := allNodes(it)
		if len(ns) == 0 {
			return ""
		}
		p := modulePrefix(b.g.nodes[ns[0]].GetName())
		for _, k := range ns[1:] {
			if modulePrefix(b.g.nodes[k].GetName()) != p {
				return ""
			}
		}
		return p
	}
	var out []*item
	for i := 0; i < len(items); {
		it := items[i]
		p := ""
		if it.l.Kind != engine.KindBlock {
			p = prefix(it)
		}
		j, weighted := i, 0
		for p != "" && j < len(items) && items[j].l.Kind != engine.KindBlock && !items[j].tap && !hasMerge(items[j:j+1]) && prefix(items[j]) == p {
			weighted += countWeighted(items[j : j+1])
			j++
		}
		if p == "" || j-i < 2 || weighted < 2 {
			out = append(out, it)
			i++
			continue
		}
		g := &item{l: engine.Layer{Kind: engine.KindBlock, Repeat: 1}, kids: append([]*item(nil), items[i:j]...), out: items[j-1].out}
		f.group[g] = p[strings.LastIndexByte(p, '/')+1:]
		out = append(out, g)
		i = j
	}
	return out
}

func countWeighted(its []*item) int {
	n := 0
	for _, it := range its {
		if it.l.Kind.HasWeights() {
			n++
		}
		n += countWeighted(it.kids)
	}
	return n
}

// cloneItems copies an item tree, merges pointing into the copy.
func cloneItems(its []*item) []*item {
	m := map[*item]*item{}
	var cp func([]*item) []*item
	cp = func(its []*item) []*item {
		if its == nil {
			return nil
		}
		out := make([]*item, len(its))
		for i, it := range its {
			c := *it
			c.kids = cp(it.kids)
			c.nodes = append([]int(nil), it.nodes...)
			m[it] = &c
			out[i] = &c
		}
		return out
	}
	out := cp(its)
	var fix func([]*item)
	fix = func(its []*item) {
		for _, it := range its {
			if c, ok := m[it.from]; ok {
				it.from = c
			}
			fix(it.kids)
		}
	}
	fix(out)
	return out
}
