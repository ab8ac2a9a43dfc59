package onnximport

import (
	"fmt"
	"slices"

	"stackfit/engine"
)

// maxDepth bounds how deep constructs nest (a block in a fork in a
// block ...): deeper graphs are refused, so a hostile one cannot exhaust
// the stack.
const maxDepth = engine.MaxDepth - 1

// item is one entry of the stack being built: a layer, or a construct
// whose body (blocks, gates) or branches (forks) are items of their own.
type item struct {
	l     engine.Layer
	kids  []*item // a block's or gate's body; a fork's branches (KindBranch items)
	nodes []int   // the graph nodes it was read from
	out   string  // the tensor it computes
	// projection: a residual block whose shortcut is a 1×1 convolution.
	projection bool
	tap        bool  // a merge reads its output by name
	from       *item // a named concatenation: the item whose output it joins; a branch: the one it starts from
	span       span  // a branch: the concatenation's inputs it fills
}

// builder walks the graph from the input, turning paths into items.
type builder struct {
	im       *importer
	g        *graph
	visited  []bool
	itemOf   map[string]*item // tensor → the item that computes it
	names    map[string]bool  // names given so far
	chanLast bool             // the map is channels-last (after a Transpose to N×H×W×C)
	pad      engine.Pair      // zero padding a Pad node left for the next convolution or pooling
	convBias int              // convolutions with a bias
	sawNorm  bool
	params   int64 // the graph's parameters read into layers
	buffers  int64 // and its buffers (batch norm's running statistics)
	// spans are the nested forks' outputs: the run of inputs of the
	// flattened concatenation each stands for.
	spans map[string]span
}

// stop is the error for graph node k.
func (b *builder) stop(k int, why string, args ...any) error {
	n := b.g.nodes[k]
	return &Stopped{Node: n.GetName(), Op: n.GetOpType(), Position: b.g.pos[k], Why: fmt.Sprintf(why, args...)}
}

// seq reads the path from tensor t up to node end (not included): first
// node via when via ≥ 0, then wherever the flow goes. It returns the
// items read and the tensor the path ends with. On an error the items
// read before it come back.
func (b *builder) seq(t string, via, end, depth int) ([]*item, string, error) {
	if b.visited == nil {
		b.visited = make([]bool, len(b.g.nodes))
	}
	var items []*item
	if depth > maxDepth {
		return nil, t, b.stop(min(max(via, 0), len(b.g.nodes)-1), "constructs nest more than %d deep", maxDepth)
	}
	cur, next := t, via
	for {
		if next < 0 {
			cs := b.g.cons[cur]
			if len(cs) == 0 {
				return items, cur, nil
			}
			if len(cs) > 1 {
				its, out, err := b.fanOut(cur, cs, end, depth)
				if err != nil {
					return items, cur, err
				}
				items, cur = append(items, its...), out
				continue
			}
			next = cs[0]
		}
		if next == end {
			return items, cur, nil
		}
		if next > end {
			return items, cur, b.stop(next, "paths that leave a branch or block before it closes (crossing branches) have no stack-file form")
		}
		if b.visited[next] {
			return items, cur, b.stop(next, "it is reached twice")
		}
		k := next
		next = -1
		if b.g.nodes[k].GetOpType() == "Split" && len(b.g.data[k]) == 1 {
			its, out, err := b.split(k, end, depth)
			if err != nil {
				return items, cur, err
			}
			items, cur = append(items, its...), out
			continue
		}
		if len(b.g.data[k]) != 1 {
			return items, cur, b.stop(k, "it merges %d computed tensors where the import expects one flow", len(b.g.data[k]))
		}
		it, out, err := b.layer(k)
		if err != nil {
			return items, cur, err
		}
		if it != nil {
			it.out = out
			b.itemOf[out] = it
			items = append(items, it)
		}
		cur = out
	}
}

// mark records nodes as read.
func (b *builder) mark(ks ...int) {
	for _, k := range ks {
		b.visited[k] = true
	}
}

// single returns the one node that reads t, or −1.
func (b *builder) single(t string) int {
	if cs := b.g.cons[t]; len(cs) == 1 {
		return cs[0]
	}
	return -1
}

// fanOut reads the paths from tensor t, which several nodes read, up to
// the node where they meet again, as one construct: a residual block
// (the join adds), a gate or an activation written as a product (it
// multiplies), a fork, dense links or a named concatenation (it
// concatenates).
func (b *builder) fanOut(t string, cs []int, end, depth int) ([]*item, string, error) {
	j := b.g.join(cs)
	if j >= len(b.g.nodes) {
		return nil, t, b.stop(cs[1], "the paths from %q do not meet again: a graph with more than one output is not a stack", t)
	}
	if j > end {
		return nil, t, b.stop(j, "paths that leave a branch or block before it closes have no stack-file form")
	}
	jn := b.g.nodes[j]
	direct := slices.Contains(cs, j)
	others := slices.DeleteFunc(slices.Clone(cs), func(c int) bool { return c == j })
	if j == end && jn.GetOpType() == "Concat" {
		// The paths meet at the concatenation that closes the enclosing
		// branch: the exporter flattened cat([a, cat([b, c])]) into one
		// node (Inception's modules).
		return b.nested(t, j, direct, others, depth)
	}
	switch jn.GetOpType() {
	case "Add":
		if len(cs) != 2 || len(b.g.data[j]) != 2 {
			break
		}
		return b.residual(t, j, direct, others, depth)
	case "Mul":
		if len(cs) == 3 && direct && len(b.g.data[j]) == 2 {
			if its, out, ok, err := b.spatialGate(t, j, others); ok {
				return its, out, err
			}
		}
		if len(cs) != 2 || !direct || len(b.g.data[j]) != 2 {
			break
		}
		return b.product(t, j, others[0], depth)
	case "Concat":
		if a := attr(jn, "axis"); a == nil || (a.GetI() != 1 && a.GetI() != -3) {
			return nil, t, b.stop(j, "it concatenates along axis %d; the stack joins maps along the channels (axis 1)", attr(jn, "axis").GetI())
		}
		return b.concat(t, j, direct, others, depth)
	}
	return nil, t, b.stop(j, "the %d paths from %q meet here, and a join by %s has no stack-file form (residual additions, gate products and concatenations do)", len(cs), t, jn.GetOpType())
}

// residual reads a residual unit: body(t) + t, or body(t) + projection(t)
// where the projection is a 1×1 convolution, with batch norm or a bias.
func (b *builder) residual(t string, j int, direct bool, others []int, depth int) ([]*item, string, error) {
	unit := &item{l: engine.Layer{Kind: engine.KindBlock, Residual: true}}
	if direct {
		body, out, err := b.seq(t, others[0], j, depth+1)
		if err != nil {
			return nil, t, err
		}
		if !b.g.reads(j, out) || out == t {
			return nil, t, b.stop(j, "its two inputs are not a body and its input")
		}
		unit.kids = body
	} else {
		var paths [2][]*item
		var ends [2]string
		for i, c := range others {
			p, out, err := b.seq(t, c, j, depth+1)
			if err != nil {
				return nil, t, err
			}
			if !b.g.reads(j, out) || out == t {
				return nil, t, b.stop(j, "its two inputs are not a body and a shortcut from one map")
			}
			paths[i], ends[i] = p, out
		}
		if ends[0] == ends[1] {
			return nil, t, b.stop(j, "it adds a map to itself")
		}
		if its, out, ok := b.topDown(t, j, paths, ends); ok {
			return its, out, nil
		}
		// The shortcut is the path that is one 1×1 convolution (and its
		// norm); torch's residual blocks add it second.
		sc := -1
		for i := 1; i >= 0; i-- {
			if sc < 0 && isProjection(paths[i]) {
				sc = i
			}
		}
		if sc < 0 {
			// Two computed paths of any other kind: a fork whose branches
			// are added (ResNet-D's average-pooling shortcut).
			return b.addFork(j, paths, ends), b.joinOut(j), nil
		}
		p := paths[sc]
		if len(p) == 2 && !p[0].l.NoBias || len(p) == 1 && p[0].l.NoBias {
			return nil, t, b.stop(p[0].nodes[0], "a projection shortcut with batch norm and a bias, or without both, has no stack-file form (a residual block's shortcut has one or the other)")
		}
		unit.kids, unit.projection, unit.l.NoShortcutNorm = paths[1-sc], true, len(p) == 1
		for _, it := range p {
			unit.nodes = append(unit.nodes, it.nodes...)
		}
	}
	b.mark(j)
	unit.nodes = append(unit.nodes, j)
	out := b.g.nodes[j].GetOutput()[0]
	if k := b.single(out); k >= 0 && len(b.g.data[k]) == 1 && !b.visited[k] {
		if act, ok := activation(b.g.nodes[k]); ok {
			unit.l.PostAct, unit.l.HasPostAct = act, true
			b.mark(k)
			unit.nodes = append(unit.nodes, k)
			out = b.g.nodes[k].GetOutput()[0]
		}
	}
	unit.out = out
	b.itemOf[out] = unit
	return []*item{unit}, out, nil
}

// joinOut is the tensor a join node computes.
func (b *builder) joinOut(j int) string { return b.g.nodes[j].GetOutput()[0] }

// addFork reads an addition of two paths from one map as a fork with
// join: add, its branches in the addition's order.
func (b *builder) addFork(j int, paths [2][]*item, ends [2]string) []*item {
	order := [2]int{0, 1}
	if b.g.data[j][0] == ends[1] {
		order = [2]int{1, 0}
	}
	fork := &item{l: engine.Layer{Kind: engine.KindFork, JoinAdd: true}, nodes: []int{j}, out: b.joinOut(j)}
	for _, i := range order {
		fork.kids = append(fork.kids, &item{l: engine.Layer{Kind: engine.KindBranch}, kids: paths[i]})
	}
	b.mark(j)
	b.itemOf[fork.out] = fork
	return []*item{fork}
}

// topDown reads an addition of a path that goes down from map t and comes
// back up to its size with a path that does not (a feature pyramid's
// top-down merge, Lin et al. 2017: the upsampled coarse map plus a
// lateral 1×1 convolution of t), written flat as a named output would be
// by hand: the path, then a fork with join: add whose branches are the
// flow itself and the other path from t by name; a deep pyramid so stays
// within the nesting limit. ok is false where the pattern does not fit.
func (b *builder) topDown(t string, j int, paths [2][]*item, ends [2]string) ([]*item, string, bool) {
	ts, os := b.g.shapes[t], b.g.shapes[b.joinOut(j)]
	src := b.itemOf[t]
	if src == nil || len(ts) != 4 || len(os) != 4 || ts[2] != os[2] || ts[3] != os[3] {
		return nil, "", false
	}
	down := -1
	for i := range paths {
		if b.goesDown(t, paths[i]) && !b.goesDown(t, paths[1-i]) {
			down = i
		}
	}
	if down < 0 {
		return nil, "", false
	}
	src.tap = true
	flow := &item{l: engine.Layer{Kind: engine.KindBranch}}
	lateral := &item{l: engine.Layer{Kind: engine.KindBranch}, kids: paths[1-down], from: src}
	fork := &item{l: engine.Layer{Kind: engine.KindFork, JoinAdd: true}, nodes: []int{j}, out: b.joinOut(j), kids: []*item{flow, lateral}}
	if b.g.data[j][0] != ends[down] {
		fork.kids = []*item{lateral, flow}
	}
	b.mark(j)
	b.itemOf[fork.out] = fork
	return append(paths[down], fork), fork.out, true
}

// isProjection reports whether a path is a projection shortcut: a 1×1
// convolution, stride as it may be, no padding or groups, then maybe a
// batch norm.
func isProjection(p []*item) bool {
	if len(p) == 0 || len(p) > 2 {
		return false
	}
	c := p[0].l
	if c.Kind != engine.KindConv || c.Kernel != engine.Square(1) || c.Groups > 1 || c.Dilation != (engine.Pair{}) ||
		c.Pad != (engine.Padding{}) || c.Depthwise {
		return false
	}
	return len(p) == 1 || p[1].l.Kind == engine.KindNorm && p[1].l.Norm == engine.NormBatch
}

// product reads a node that multiplies t by something computed from t:
// x·sigmoid(x) is SiLU, x·hardsigmoid(x) hard swish, x·tanh(softplus(x))
// Mish, x·(1 + erf(x/√2)) then ·0.5 GELU in its expanded form; anything
// else is a gate whose body computes the factor.
func (b *builder) product(t string, j, other, depth int) ([]*item, string, error) {
	out := b.g.nodes[j].GetOutput()[0]
	act := func(a engine.ActKind, ks ...int) ([]*item, string, error) {
		b.mark(ks...)
		it := &item{l: engine.Layer{Kind: engine.KindAct, Act: a}, nodes: ks, out: b.g.nodes[ks[len(ks)-1]].GetOutput()[0]}
		b.itemOf[it.out] = it
		return []*item{it}, it.out, nil
	}
	chain := b.chain(other, j)
	ops := make([]string, len(chain))
	for i, k := range chain {
		ops[i] = b.g.nodes[k].GetOpType()
	}
	switch {
	case slices.Equal(ops, []string{"Sigmoid"}):
		return act(engine.ActSiLU, other, j)
	case slices.Equal(ops, []string{"HardSigmoid"}) && hardSigmoid(b.g.nodes[other]):
		return act(engine.ActHardSwish, other, j)
	case slices.Equal(ops, []string{"Softplus", "Tanh"}):
		// Mish, x·tanh(softplus(x)), as torch.onnx 1.13 writes nn.Mish
		// at opsets 13 and 17 (it has no ONNX operator before opset 18).
		return act(engine.ActMish, append(chain, j)...)
	case slices.Equal(ops, []string{"Div", "Erf", "Add"}):
		if k := b.single(out); k >= 0 && b.g.nodes[k].GetOpType() == "Mul" && len(b.g.data[k]) == 1 {
			return act(engine.ActGELU, append(chain, j, k)...)
		}
	}
	body, end, err := b.seq(t, other, j, depth+1)
	if err != nil {
		return nil, t, err
	}
	if !b.g.reads(j, end) || end == t {
		return nil, t, b.stop(j, "its two inputs are not a map and a factor computed from it")
	}
	b.mark(j)
	g := &item{l: engine.Layer{Kind: engine.KindGate}, kids: body, nodes: []int{j}, out: out}
	b.itemOf[out] = g
	return []*item{g}, out, nil
}

// chain returns the nodes from k on, each the only reader of the one
// before, up to (not including) node end; nil where the path branches
// or reaches end by another way.
func (b *builder) chain(k, end int) []int {
	var ks []int
	for len(ks) < 4 {
		if len(b.g.data[k]) != 1 || b.visited[k] {
			return nil
		}
		ks = append(ks, k)
		n := b.single(b.g.nodes[k].GetOutput()[0])
		if n == end {
			return ks
		}
		if n < 0 {
			return nil
		}
		k = n
	}
	return nil
}

// concat reads the paths from t that a concatenation joins: [t, body(t)]
// is a unit with dense links, [path(t), t] a named concatenation after
// the path (a U-Net's skip link), and anything else a fork whose branches
// are the paths in the concatenation's order (t itself an empty branch).
func (b *builder) concat(t string, j int, direct bool, others []int, depth int) ([]*item, string, error) {
	ins := b.g.data[j]
	out := b.g.nodes[j].GetOutput()[0]
	crop := false
	if len(others) == 2 && len(ins) == 2 && !direct {
		// A map cropped to the other path's size on its way into the join
		// (a U-Net without padding): the join reads the map, cropped.
		for i, c := range others {
			n := b.g.nodes[c]
			if o := n.GetOutput()[0]; n.GetOpType() == "CenterCrop" && b.single(o) == j && slices.Contains(ins, o) {
				b.mark(c)
				ins = slices.Clone(ins)
				ins[slices.Index(ins, o)] = t
				others = slices.Delete(slices.Clone(others), i, i+1)
				direct, crop = true, true
				break
			}
		}
	}
	if direct && len(others) == 1 && len(ins) == 2 {
		path, end, err := b.seq(t, others[0], j, depth+1)
		if err != nil {
			return nil, t, err
		}
		b.mark(j)
		switch {
		case ins[0] == t && ins[1] == end && b.goesDown(t, path):
			// A path that goes down and comes back up, joined after the
			// map it left (torch.cat([skip, up(x)])): a U-Net's skip,
			// written flat as a named concatenation with the named map
			// first, so deep U-Nets stay within the nesting limit.
			src := b.itemOf[t]
			if src == nil {
				return nil, t, b.stop(j, "it concatenates the stack's input, which a concatenation cannot name")
			}
			src.tap = true
			c := &item{l: engine.Layer{Kind: engine.KindConcat, First: true, Crop: crop}, from: src, nodes: []int{j}, out: out}
			b.itemOf[out] = c
			return append(path, c), out, nil
		case ins[0] == t && ins[1] == end && !crop:
			u := &item{l: engine.Layer{Kind: engine.KindBlock, DenseLinks: true}, kids: path, nodes: []int{j}, out: out}
			b.itemOf[out] = u
			return []*item{u}, out, nil
		case ins[0] == end && ins[1] == t:
			src := b.itemOf[t]
			if src == nil {
				return nil, t, b.stop(j, "it concatenates the stack's input, which a concatenation cannot name")
			}
			src.tap = true
			c := &item{l: engine.Layer{Kind: engine.KindConcat, Crop: crop}, from: src, nodes: []int{j}, out: out}
			b.itemOf[out] = c
			return append(path, c), out, nil
		}
		return nil, t, b.stop(j, "its inputs are not the map and a path from it")
	}
	fork := &item{l: engine.Layer{Kind: engine.KindFork}, nodes: []int{j}, out: out}
	branches, err := b.branches(t, j, others, depth)
	if err != nil {
		return nil, t, err
	}
	for i, in := range ins {
		switch {
		case branches[i] != nil || b.covered(branches, i):
		case in == t:
			branches[i] = &item{l: engine.Layer{Kind: engine.KindBranch}}
		default:
			return nil, t, b.stop(j, "its input %q does not come from the map %q the paths start at", in, t)
		}
	}
	b.mark(j)
	fork.kids = slices.DeleteFunc(branches, func(it *item) bool { return it == nil })
	b.itemOf[out] = fork
	return []*item{fork}, out, nil
}

// span is the run of a concatenation's inputs, first to last, that one
// branch fills: one input, or several where the branch ends in a nested
// fork.
type span struct{ lo, hi int }

// branches reads the paths from t that start at nodes cs and end in
// inputs of concatenation j, as branches placed at the first input each
// fills (nil elsewhere). A path that ends in a nested fork fills the run
// of inputs the fork stands for.
func (b *builder) branches(t string, j int, cs []int, depth int) ([]*item, error) {
	ins := b.g.data[j]
	out := make([]*item, len(ins))
	for _, c := range cs {
		path, end, err := b.seq(t, c, j, depth+1)
		if err != nil {
			return nil, err
		}
		sp, ok := b.spans[end]
		if !ok {
			i := slices.Index(ins, end)
			if i < 0 {
				return nil, b.stop(j, "a path from %q does not end in one of its inputs", t)
			}
			sp = span{i, i}
		}
		if out[sp.lo] != nil || b.covered(out, sp.lo) {
			return nil, b.stop(j, "two paths from %q end in its input %d", t, sp.lo+1)
		}
		out[sp.lo] = &item{l: engine.Layer{Kind: engine.KindBranch}, kids: path, span: sp}
	}
	return out, nil
}

// covered reports whether input i is filled by a branch placed at an
// earlier input (one ending in a nested fork).
func (b *builder) covered(branches []*item, i int) bool {
	for k := range i {
		if br := branches[k]; br != nil && br.span.hi >= i {
			return true
		}
	}
	return false
}

// nested reads the paths from t that end in a run of adjacent inputs of
// concatenation j, which also joins paths from outside: a fork whose
// output stands for those inputs (a name no node computes, kept in
// b.spans); the enclosing concatenation places it.
func (b *builder) nested(t string, j int, direct bool, others []int, depth int) ([]*item, string, error) {
	if a := attr(b.g.nodes[j], "axis"); a == nil || (a.GetI() != 1 && a.GetI() != -3) {
		return nil, t, b.stop(j, "it concatenates along axis %d; the stack joins maps along the channels (axis 1)", attr(b.g.nodes[j], "axis").GetI())
	}
	ins := b.g.data[j]
	branches, err := b.branches(t, j, others, depth)
	if err != nil {
		return nil, t, err
	}
	if direct {
		for i, in := range ins {
			if in == t && branches[i] == nil && !b.covered(branches, i) {
				branches[i] = &item{l: engine.Layer{Kind: engine.KindBranch}, span: span{i, i}}
			}
		}
	}
	sp := span{lo: -1}
	for i, br := range branches {
		if br == nil {
			continue
		}
		if sp.lo >= 0 && i != sp.hi+1 {
			return nil, t, b.stop(j, "the paths from %q end in inputs %d and %d with another between them: a nested concatenation's inputs must be adjacent", t, sp.hi+1, i+1)
		}
		if sp.lo < 0 {
			sp.lo = i
		}
		sp.hi = br.span.hi
	}
	if sp.lo < 0 {
		return nil, t, b.stop(j, "no path from %q ends in it", t)
	}
	out := fmt.Sprintf("\x00%d:%d-%d", j, sp.lo, sp.hi)
	fork := &item{l: engine.Layer{Kind: engine.KindFork}, kids: slices.DeleteFunc(branches, func(it *item) bool { return it == nil }), out: out}
	if b.spans == nil {
		b.spans = map[string]span{}
	}
	b.spans[out] = sp
	b.itemOf[out] = fork
	return []*item{fork}, out, nil
}

// split reads a Split node (equal parts of the channels, as the folding
// pass leaves torch.chunk) whose parts run as branches into one
// concatenation along the channels, in their order: a fork with split
// input (ShuffleNet V2's units, Ma et al. 2018). A part may go straight
// into the concatenation (an empty branch).
func (b *builder) split(k, end, depth int) ([]*item, string, error) {
	n := b.g.nodes[k]
	outs := n.GetOutput()
	if a := attr(n, "axis"); a == nil || (a.GetI() != 1 && a.GetI() != -3) || len(outs) < 2 {
		return nil, "", b.stop(k, "only a split of the channels into equal parts is read")
	}
	var cs []int
	for _, o := range outs {
		cs = append(cs, b.g.cons[o]...)
	}
	j := b.g.join(cs)
	if j >= len(b.g.nodes) || j > end || b.g.nodes[j].GetOpType() != "Concat" {
		return nil, "", b.stop(k, "its parts do not meet again at one concatenation: a split has a stack-file form only as a fork whose branches are joined")
	}
	if a := attr(b.g.nodes[j], "axis"); a == nil || (a.GetI() != 1 && a.GetI() != -3) {
		return nil, "", b.stop(j, "it joins the parts of a split along an axis other than the channels")
	}
	ins := b.g.data[j]
	if len(ins) != len(outs) {
		return nil, "", b.stop(j, "it joins %d maps where the split made %d parts", len(ins), len(outs))
	}
	b.mark(k)
	branches := make([]*item, len(outs))
	for i, o := range outs {
		var path []*item
		last := o
		if cons := b.g.cons[o]; !(len(cons) == 1 && cons[0] == j) {
			var err error
			path, last, err = b.seq(o, -1, j, depth+1)
			if err != nil {
				return nil, "", err
			}
		}
		if ins[i] != last {
			return nil, "", b.stop(j, "the parts of the split %q are not joined in their order", n.GetName())
		}
		branches[i] = &item{l: engine.Layer{Kind: engine.KindBranch}, kids: path}
	}
	b.mark(j)
	out := b.g.nodes[j].GetOutput()[0]
	fork := &item{l: engine.Layer{Kind: engine.KindFork, Split: true}, kids: branches, nodes: []int{k, j}, out: out}
	b.itemOf[out] = fork
	return []*item{fork}, out, nil
}

// goesDown reports whether a path from tensor t passes through a map
// smaller than t in height or width (it is pooled or strided, then
// brought back up).
func (b *builder) goesDown(t string, path []*item) bool {
	ts := b.g.shapes[t]
	if len(ts) != 4 {
		return false
	}
	var walk func([]*item) bool
	walk = func(its []*item) bool {
		for _, it := range its {
			if s := b.g.shapes[it.out]; len(s) == 4 && (s[2] < ts[2] || s[3] < ts[3]) {
				return true
			}
			if walk(it.kids) {
				return true
			}
		}
		return false
	}
	return walk(path)
}
