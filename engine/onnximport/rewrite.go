package onnximport

import (
	"slices"

	"google.golang.org/protobuf/proto"

	"stackfit/engine/onnximport/onnxpb"
)

// Local rewrites: subgraphs an exporter writes for one layer, replaced by
// one node the layer reader knows. The replacement takes the first
// node's place (and name) in the graph's order, so the order stays
// topological, and reads the subgraph's one computed input.
//
//   - layer norm over the last axis, decomposed (opset < 17):
//     ReduceMean(-1) → Sub → Pow 2 → ReduceMean(-1) → Add eps → Sqrt →
//     Div [→ Mul γ → Add β] becomes LayerNormalization;
//   - group norm (opset < 18): Reshape(N, G, −1) → InstanceNormalization
//     → Reshape back [→ Mul γ → Add β] becomes GroupNormalization;
//   - channel shuffle: Reshape(N, g, C/g, H, W) → Transpose(0, 2, 1, 3,
//     4) → Reshape back becomes ChannelShuffle (not an ONNX operator: the
//     stack's shuffle);
//   - pixel shuffle and unshuffle (PyTorch's order, CRD): Reshape(N, C,
//     r, r, H, W) → Transpose(0, 1, 4, 2, 5, 3) → Reshape(N, C, rH, rW)
//     becomes DepthToSpace in mode CRD (PyTorch's export below opset 11),
//     and Reshape(N, C, H/r, r, W/r, r) → Transpose(0, 1, 3, 5, 2, 4) →
//     Reshape(N, C·r², H/r, W/r) becomes PixelUnshuffle (PyTorch's
//     nn.PixelUnshuffle export at opsets 13 and 17; not an ONNX operator:
//     the stack's to-channels);
//   - Slices of one tensor along the channels into equal parts (a chunk)
//     become one Split on axis 1 with an output per part, in order;
//   - one or two Slices of the height and width that keep a centred
//     window (a U-Net's skip cropped to the decoder's size) become
//     CenterCrop (not an ONNX operator: a merge's crop).
type rewriter struct {
	im      *importer
	gr      *graph
	outputs map[string]bool
	dead    []bool
	before  map[int][]*onnxpb.Node // replacements, placed before node index k
	data    map[*onnxpb.Node][]string
	pos     map[*onnxpb.Node]int
}

// rewrite applies the local rewrites to gr until none applies.
func (im *importer) rewrite(gr *graph, outputs map[string]bool) {
	for range 4 {
		r := &rewriter{im: im, gr: gr, outputs: outputs, dead: make([]bool, len(gr.nodes)),
			before: map[int][]*onnxpb.Node{}, data: map[*onnxpb.Node][]string{}, pos: map[*onnxpb.Node]int{}}
		changed := false
		for k := range gr.nodes {
			if r.dead[k] {
				continue
			}
			if r.layerNorm(k) || r.groupNorm(k) || r.shuffle(k) || r.pixels(k) || r.chunk(k) || r.crop(k) {
				changed = true
			}
		}
		if !changed {
			return
		}
		r.rebuild()
	}
}

// only is the one live reader of tensor t, or −1 (none, several, or t
// is a graph output).
func (r *rewriter) only(t string) int {
	cs := r.gr.cons[t]
	if len(cs) != 1 || r.outputs[t] || r.dead[cs[0]] {
		return -1
	}
	return cs[0]
}

// is reports whether node k is live, of operator op, and reads exactly
// the computed inputs data (in order; nil: any one).
func (r *rewriter) is(k int, op string, data ...string) bool {
	if k < 0 || r.dead[k] || r.gr.nodes[k].GetOpType() != op {
		return false
	}
	if data == nil {
		return len(r.gr.data[k]) == 1
	}
	return slices.Equal(r.gr.data[k], data)
}

func (r *rewriter) out(k int) string { return r.gr.nodes[k].GetOutput()[0] }

// other is node k's input that is not tensor t (a binary node's constant).
func (r *rewriter) other(k int, t string) string {
	ins := r.gr.nodes[k].GetInput()
	if len(ins) != 2 {
		return ""
	}
	if ins[0] == t {
		return ins[1]
	}
	return ins[0]
}

// replace marks nodes ks dead and puts n, reading data, in place of the
// first.
func (r *rewriter) replace(ks []int, n *onnxpb.Node, data []string) {
	first := slices.Min(ks)
	for _, k := range ks {
		r.dead[k] = true
	}
	r.before[first] = append(r.before[first], n)
	r.data[n] = data
	r.pos[n] = r.gr.pos[first]
	r.im.res.Read += len(ks) - 1 // the nodes merged into one
}

// rebuild writes the graph's node list again with the replacements.
func (r *rewriter) rebuild() {
	gr := r.gr
	var nodes []*onnxpb.Node
	var pos []int
	var data [][]string
	for k, n := range gr.nodes {
		for _, m := range r.before[k] {
			nodes, pos, data = append(nodes, m), append(pos, r.pos[m]), append(data, r.data[m])
		}
		if !r.dead[k] {
			nodes, pos, data = append(nodes, n), append(pos, gr.pos[k]), append(data, gr.data[k])
		}
	}
	gr.nodes, gr.pos, gr.data = nodes, pos, data
	gr.prod, gr.cons = map[string]int{}, map[string][]int{}
	for k, n := range nodes {
		for _, in := range data[k] {
			if c := gr.cons[in]; len(c) == 0 || c[len(c)-1] != k {
				gr.cons[in] = append(c, k)
			}
		}
		for _, o := range n.GetOutput() {
			if o != "" {
				gr.prod[o] = k
			}
		}
	}
}

func fattr(name string, v float32) *onnxpb.Attribute {
	return &onnxpb.Attribute{Name: proto.String(name), Kind: proto.Int32(1), F: proto.Float32(v)}
}

func iattr(name string, v int64) *onnxpb.Attribute {
	return &onnxpb.Attribute{Name: proto.String(name), Kind: proto.Int32(2), I: proto.Int64(v)}
}

// axes reads a reduction's axes (an attribute, or from opset 18 an input).
func (r *rewriter) axes(k int) []int64 {
	n := r.gr.nodes[k]
	if a := attr(n, "axes"); a != nil {
		return a.GetInts()
	}
	if ins := n.GetInput(); len(ins) > 1 {
		v, _ := r.im.intsOf(ins[1])
		return v
	}
	return nil
}

// affine follows a normalisation's output t through Mul γ → Add β, each
// by a learnable constant of shape want; it returns the nodes, γ, β and
// the output (none found: nil and t).
func (r *rewriter) affine(t string, want func([]int64) bool) ([]int, string, string, string) {
	mu := r.only(t)
	if !r.is(mu, "Mul") {
		return nil, "", "", t
	}
	ba := r.only(r.out(mu))
	if !r.is(ba, "Add") {
		return nil, "", "", t
	}
	g, b := r.other(mu, t), r.other(ba, r.out(mu))
	dg, ok1 := r.im.dims(g)
	db, ok2 := r.im.dims(b)
	if !ok1 || !ok2 || !r.im.initial[g] || !r.im.initial[b] || !want(dg) || !want(db) {
		return nil, "", "", t
	}
	return []int{mu, ba}, g, b, r.out(ba)
}

// layerNorm matches the decomposed layer norm starting at ReduceMean k.
func (r *rewriter) layerNorm(k int) bool {
	if !r.is(k, "ReduceMean") || !slices.Equal(r.axes(k), []int64{-1}) {
		return false
	}
	x, mean := r.gr.data[k][0], r.out(k)
	sub := r.only(mean)
	if !r.is(sub, "Sub", x, mean) {
		return false
	}
	cs := r.gr.cons[r.out(sub)]
	if len(cs) != 2 || r.outputs[r.out(sub)] {
		return false
	}
	pow, div := cs[0], cs[1]
	if r.gr.nodes[pow].GetOpType() == "Div" {
		pow, div = div, pow
	}
	if !r.is(pow, "Pow") {
		return false
	}
	if e, ok := r.im.scalar(r.other(pow, r.out(sub))); !ok || e != 2 {
		return false
	}
	rm := r.only(r.out(pow))
	if !r.is(rm, "ReduceMean") || !slices.Equal(r.axes(rm), []int64{-1}) {
		return false
	}
	add := r.only(r.out(rm))
	if !r.is(add, "Add") {
		return false
	}
	eps, ok := r.im.scalar(r.other(add, r.out(rm)))
	if !ok || !(eps > 0 && eps < 1) {
		return false
	}
	sq := r.only(r.out(add))
	if !r.is(sq, "Sqrt") || r.only(r.out(sq)) != div || !r.is(div, "Div", r.out(sub), r.out(sq)) {
		return false
	}
	ks := []int{k, sub, pow, rm, add, sq, div}
	c := int64(-1)
	if sh := r.gr.shapes[x]; len(sh) > 0 {
		c = sh[len(sh)-1]
	}
	aff, g, b, out := r.affine(r.out(div), func(d []int64) bool { return len(d) == 1 && (c < 0 || d[0] == c) })
	ins := []string{x}
	if aff != nil {
		ks, ins = append(ks, aff...), append(ins, g, b)
	}
	n := &onnxpb.Node{OpType: proto.String("LayerNormalization"), Name: proto.String(r.gr.nodes[k].GetName()), Input: ins, Output: []string{out},
		Attribute: []*onnxpb.Attribute{iattr("axis", -1), fattr("epsilon", float32(eps))}}
	r.replace(ks, n, []string{x})
	return true
}

// groupNorm matches the group norm written with instance norm, starting
// at Reshape k.
func (r *rewriter) groupNorm(k int) bool {
	if !r.is(k, "Reshape") {
		return false
	}
	x := r.gr.data[k][0]
	xs := r.gr.shapes[x]
	v, ok := r.im.intsOf(r.gr.nodes[k].GetInput()[1])
	if !ok || len(v) != 3 || v[1] < 1 || len(xs) != 4 || xs[1]%v[1] != 0 {
		return false
	}
	in := r.only(r.out(k))
	if !r.is(in, "InstanceNormalization") {
		return false
	}
	back := r.only(r.out(in))
	if !r.is(back, "Reshape") || !slices.Equal(r.gr.shapes[r.out(back)], xs) {
		return false
	}
	eps := float32(1e-5)
	if a := attr(r.gr.nodes[in], "epsilon"); a != nil {
		eps = a.GetF()
	}
	ks := []int{k, in, back}
	aff, g, b, out := r.affine(r.out(back), func(d []int64) bool {
		return len(d) == 3 && d[0] == xs[1] && d[1] == 1 && d[2] == 1 || len(d) == 1 && d[0] == xs[1]
	})
	ins := []string{x}
	if aff != nil {
		ks, ins = append(ks, aff...), append(ins, g, b)
	}
	n := &onnxpb.Node{OpType: proto.String("GroupNormalization"), Name: proto.String(r.gr.nodes[k].GetName()), Input: ins, Output: []string{out},
		Attribute: []*onnxpb.Attribute{iattr("num_groups", v[1]), fattr("epsilon", eps)}}
	r.replace(ks, n, []string{x})
	return true
}

// shuffle matches the channel shuffle starting at Reshape k.
func (r *rewriter) shuffle(k int) bool {
	if !r.is(k, "Reshape") {
		return false
	}
	x := r.gr.data[k][0]
	xs, s5 := r.gr.shapes[x], r.gr.shapes[r.out(k)]
	if len(xs) != 4 || len(s5) != 5 || s5[0] != xs[0] || s5[1]*s5[2] != xs[1] || s5[3] != xs[2] || s5[4] != xs[3] {
		return false
	}
	t := r.only(r.out(k))
	if !r.is(t, "Transpose") || !slices.Equal(attr(r.gr.nodes[t], "perm").GetInts(), []int64{0, 2, 1, 3, 4}) {
		return false
	}
	back := r.only(r.out(t))
	if !r.is(back, "Reshape") || !slices.Equal(r.gr.shapes[r.out(back)], xs) {
		return false
	}
	n := &onnxpb.Node{OpType: proto.String("ChannelShuffle"), Name: proto.String(r.gr.nodes[k].GetName()), Input: []string{x},
		Output: []string{r.out(back)}, Attribute: []*onnxpb.Attribute{iattr("groups", s5[1])}}
	r.replace([]int{k, t, back}, n, []string{x})
	return true
}

// pixels matches the pixel shuffle or unshuffle written as Reshape to 6
// dimensions, Transpose and Reshape back to 4, starting at Reshape k.
func (r *rewriter) pixels(k int) bool {
	if !r.is(k, "Reshape") {
		return false
	}
	x := r.gr.data[k][0]
	xs, s6 := r.gr.shapes[x], r.gr.shapes[r.out(k)]
	if len(xs) != 4 || len(s6) != 6 || s6[0] != xs[0] {
		return false
	}
	t := r.only(r.out(k))
	if !r.is(t, "Transpose") {
		return false
	}
	back := r.only(r.out(t))
	if !r.is(back, "Reshape") {
		return false
	}
	perm, ys := attr(r.gr.nodes[t], "perm").GetInts(), r.gr.shapes[r.out(back)]
	if len(ys) != 4 || ys[0] != xs[0] {
		return false
	}
	var op string
	var bs int64
	c := xs[1]
	switch {
	case slices.Equal(perm, []int64{0, 1, 4, 2, 5, 3}) && s6[2] == s6[3] && s6[2] >= 1 && c%(s6[2]*s6[3]) == 0 && c/(s6[2]*s6[3]) == s6[1] && s6[4] == xs[2] && s6[5] == xs[3] &&
		ys[1] == s6[1] && ys[2] == xs[2]*s6[2] && ys[3] == xs[3]*s6[3]:
		// (N, C·r², H, W) as (N, C, r, r, H, W) → (N, C, H, r, W, r).
		op, bs = "DepthToSpace", s6[2]
	case slices.Equal(perm, []int64{0, 1, 3, 5, 2, 4}) && s6[1] == c && s6[3] == s6[5] && s6[2]*s6[3] == xs[2] && s6[4]*s6[5] == xs[3] &&
		s6[3] >= 1 && ys[1]%(s6[3]*s6[5]) == 0 && ys[1]/(s6[3]*s6[5]) == c && ys[2] == s6[2] && ys[3] == s6[4]:
		// (N, C, H, W) as (N, C, H/r, r, W/r, r) → (N, C, r, r, H/r, W/r).
		op, bs = "PixelUnshuffle", s6[3]
	default:
		return false
	}
	attrs := []*onnxpb.Attribute{iattr("blocksize", bs)}
	if op == "DepthToSpace" {
		attrs = append(attrs, &onnxpb.Attribute{Name: proto.String("mode"), Kind: proto.Int32(3), S: []byte("CRD")})
	}
	n := &onnxpb.Node{OpType: proto.String(op), Name: proto.String(r.gr.nodes[k].GetName()), Input: []string{x},
		Output: []string{r.out(back)}, Attribute: attrs}
	r.replace([]int{k, t, back}, n, []string{x})
	return true
}

// chunk matches Slices that together read all of a tensor, each an equal
// run of its channels (torch.chunk), starting at the first of them, k.
func (r *rewriter) chunk(k int) bool {
	if !r.is(k, "Slice") {
		return false
	}
	x := r.gr.data[k][0]
	xs := r.gr.shapes[x]
	cs := r.gr.cons[x]
	if len(xs) < 2 || len(cs) < 2 || cs[0] != k || r.outputs[x] {
		return false
	}
	type part struct {
		lo, hi int64
		k      int
	}
	var parts []part
	for _, c := range cs {
		if !r.is(c, "Slice") {
			return false
		}
		ins := r.gr.nodes[c].GetInput()
		if len(ins) < 4 {
			return false
		}
		st, ok1 := r.im.intsOf(ins[1])
		en, ok2 := r.im.intsOf(ins[2])
		ax, ok3 := r.im.intsOf(ins[3])
		if !ok1 || !ok2 || !ok3 || len(st) != 1 || len(en) != 1 || len(ax) != 1 {
			return false
		}
		if a, ok := axisOf(ax[0], int64(len(xs))); !ok || a != 1 {
			return false
		}
		if len(ins) > 4 && ins[4] != "" {
			if sp, ok := r.im.intsOf(ins[4]); !ok || !slices.Equal(sp, []int64{1}) {
				return false
			}
		}
		parts = append(parts, part{clampIndex(st[0], xs[1]), clampIndex(en[0], xs[1]), c})
	}
	slices.SortFunc(parts, func(a, b part) int { return int(a.lo - b.lo) })
	size := parts[0].hi - parts[0].lo
	at := int64(0)
	for _, p := range parts {
		if p.lo != at || p.hi-p.lo != size || size < 1 {
			return false
		}
		at = p.hi
	}
	if at != xs[1] {
		return false
	}
	var ks []int
	var outs []string
	for _, p := range parts {
		ks, outs = append(ks, p.k), append(outs, r.out(p.k))
	}
	n := &onnxpb.Node{OpType: proto.String("Split"), Name: proto.String(r.gr.nodes[parts[0].k].GetName()), Input: []string{x},
		Output: outs, Attribute: []*onnxpb.Attribute{iattr("axis", 1)}}
	r.replace(ks, n, []string{x})
	return true
}

// spatialSlice reads Slice node k as a window of x's height and width:
// per spatial axis (0 height, 1 width) its start and end, or ok false
// when it slices another axis, steps, or is not known.
func (r *rewriter) spatialSlice(k int, xs []int64) (lo, hi [2]int64, set [2]bool, ok bool) {
	ins := r.gr.nodes[k].GetInput()
	if len(ins) < 4 {
		return lo, hi, set, false
	}
	st, ok1 := r.im.intsOf(ins[1])
	en, ok2 := r.im.intsOf(ins[2])
	ax, ok3 := r.im.intsOf(ins[3])
	if !ok1 || !ok2 || !ok3 || len(st) != len(en) || len(st) != len(ax) || len(st) == 0 {
		return lo, hi, set, false
	}
	if len(ins) > 4 && ins[4] != "" {
		steps, ok := r.im.intsOf(ins[4])
		if !ok || slices.ContainsFunc(steps, func(s int64) bool { return s != 1 }) {
			return lo, hi, set, false
		}
	}
	for i, a := range ax {
		j, ok := axisOf(a, 4)
		if !ok || j < 2 || set[j-2] {
			return lo, hi, set, false
		}
		dim := xs[j]
		b, e := st[i], min(en[i], dim)
		if b < 0 || e <= b {
			return lo, hi, set, false
		}
		lo[j-2], hi[j-2], set[j-2] = b, e, true
	}
	return lo, hi, set, true
}

// crop matches one Slice of x's height and width, or two in a row (one
// per axis), that keep a centred window: the start on each axis is
// (size − kept) / 2, rounded down, as a merge's crop takes it.
func (r *rewriter) crop(k int) bool {
	if !r.is(k, "Slice") {
		return false
	}
	x := r.gr.data[k][0]
	xs := r.gr.shapes[x]
	if len(xs) != 4 {
		return false
	}
	lo, hi, set, ok := r.spatialSlice(k, xs)
	if !ok {
		return false
	}
	ks := []int{k}
	if n := r.only(r.out(k)); r.is(n, "Slice", r.out(k)) {
		lo2, hi2, set2, ok := r.spatialSlice(n, xs)
		if ok && set[0] != set2[0] && set[1] != set2[1] {
			for i := range 2 {
				if set2[i] {
					lo[i], hi[i], set[i] = lo2[i], hi2[i], true
				}
			}
			ks = append(ks, n)
		}
	}
	var keep [2]int64
	for i := range 2 {
		size := xs[2+i]
		if !set[i] {
			lo[i], hi[i] = 0, size
		}
		keep[i] = hi[i] - lo[i]
		if lo[i] != (size-keep[i])/2 {
			return false
		}
	}
	if keep[0] == xs[2] && keep[1] == xs[3] {
		return false // keeps everything: not a crop
	}
	last := ks[len(ks)-1]
	n := &onnxpb.Node{OpType: proto.String("CenterCrop"), Name: proto.String(r.gr.nodes[k].GetName()), Input: []string{x},
		Output: []string{r.out(last)}, Attribute: []*onnxpb.Attribute{iattr("height", keep[0]), iattr("width", keep[1])}}
	r.replace(ks, n, []string{x})
	return true
}
