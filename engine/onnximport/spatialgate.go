package onnximport

import (
	"slices"

	"stackfit/engine"
)

// spatialGate reads a spatial gate (Woo et al. 2018, CBAM's spatial
// attention) at node j, a product that reads t and two more nodes that
// read t: ReduceMean and ReduceMax over the channels (axis 1, dimensions
// kept), one Concat of the two on axis 1, a Conv of those 2 channels to
// 1 with an odd square kernel padded to keep the size, an optional
// BatchNormalization, a Sigmoid, and the Mul of t by it (what torch.onnx
// 1.13 writes at opsets 13 and 17 for torch.mean(x, 1, keepdim=True),
// torch.max(x, 1, keepdim=True)[0], torch.cat, nn.Conv2d and
// torch.sigmoid). The pair may come in either order: the stack writes the
// mean first, as the paper's equation 3 does, and the order changes no
// count. ok is false where the two readers are not the channel mean and
// maximum, so the caller goes on to its other readings; past them, a part
// that does not fit stops the import at its node.
func (b *builder) spatialGate(t string, j int, others []int) (its []*item, out string, ok bool, err error) {
	if len(others) != 2 || b.chanLast || b.pad != (engine.Pair{}) {
		return nil, t, false, nil
	}
	ops := []string{b.g.nodes[others[0]].GetOpType(), b.g.nodes[others[1]].GetOpType()}
	slices.Sort(ops)
	if !slices.Equal(ops, []string{"ReduceMax", "ReduceMean"}) {
		return nil, t, false, nil
	}
	var pooled []string
	for _, k := range others {
		if !b.channelReduce(k) {
			return nil, t, false, nil
		}
		pooled = append(pooled, b.g.nodes[k].GetOutput()[0])
	}
	cat := b.single(pooled[0])
	if cat < 0 || cat != b.single(pooled[1]) || b.visited[cat] || b.g.nodes[cat].GetOpType() != "Concat" {
		return nil, t, false, nil
	}
	stop := func(k int, why string) ([]*item, string, bool, error) {
		return nil, t, true, b.stop(k, "%s: a spatial gate concatenates the channels' mean and maximum along axis 1, then one Conv of the 2 channels to 1 (an odd square kernel, padding (k − 1)/2, stride 1), maybe a BatchNormalization, a Sigmoid, and multiplies the map by it", why)
	}
	cn := b.g.nodes[cat]
	if a := attr(cn, "axis"); a == nil || a.GetI() != 1 && a.GetI() != -3 || len(cn.GetInput()) != 2 || len(b.g.data[cat]) != 2 {
		return stop(cat, "it does not join the mean and the maximum alone along the channels")
	}
	b.mark(others...)
	b.mark(cat)
	nodes := append(slices.Clone(others), cat)
	conv := b.single(cn.GetOutput()[0])
	if conv < 0 || b.visited[conv] || b.g.nodes[conv].GetOpType() != "Conv" || len(b.g.data[conv]) != 1 {
		return stop(cat, "its one reader is not a convolution")
	}
	it, next, err := b.layer(conv)
	if err != nil {
		return nil, t, true, err
	}
	c := it.l
	k := c.Kernel.H
	w, _ := b.im.dims(b.g.nodes[conv].GetInput()[1])
	if c.Filters != 1 || len(w) != 4 || w[1] != 2 || c.Kernel.W != k || k%2 == 0 || c.Stride != (engine.Pair{}) ||
		c.Dilation != (engine.Pair{}) || c.Groups > 1 || c.Pad != (engine.Padding{Size: engine.Square(k / 2)}) {
		return stop(conv, "the convolution does not map 2 channels to 1 with an odd square kernel that keeps the size")
	}
	nodes = append(nodes, it.nodes...)
	gate := engine.Layer{Kind: engine.KindSpatialGate, Kernel: engine.Square(k), NoBias: c.NoBias}
	sig := b.single(next)
	if sig >= 0 && !b.visited[sig] && b.g.nodes[sig].GetOpType() == "BatchNormalization" && len(b.g.data[sig]) == 1 {
		it, n, err := b.layer(sig)
		if err != nil {
			return nil, t, true, err
		}
		gate.GateNorm = true
		nodes = append(nodes, it.nodes...)
		next = n
		sig = b.single(next)
	}
	if sig < 0 || b.visited[sig] || b.g.nodes[sig].GetOpType() != "Sigmoid" || len(b.g.data[sig]) != 1 {
		return stop(conv, "the convolution is not followed by a sigmoid")
	}
	if b.single(b.g.nodes[sig].GetOutput()[0]) != j || !b.g.reads(j, b.g.nodes[sig].GetOutput()[0]) || !b.g.reads(j, t) {
		return stop(sig, "the sigmoid's one reader is not the product with the map")
	}
	b.mark(sig, j)
	nodes = append(nodes, sig, j)
	out = b.g.nodes[j].GetOutput()[0]
	g := &item{l: gate, nodes: nodes, out: out}
	b.itemOf[out] = g
	return []*item{g}, out, true, nil
}

// channelReduce reports whether node k reduces its one computed input
// over the channels alone (axes [1] or [−3]), keeping the dimension.
func (b *builder) channelReduce(k int) bool {
	n := b.g.nodes[k]
	if len(b.g.data[k]) != 1 || b.visited[k] {
		return false
	}
	axes := attr(n, "axes").GetInts()
	if ins := n.GetInput(); axes == nil && len(ins) > 1 && ins[1] != "" {
		axes, _ = b.im.ints(ins[1])
	}
	keep := attr(n, "keepdims") == nil || attr(n, "keepdims").GetI() != 0
	return keep && len(axes) == 1 && (axes[0] == 1 || axes[0] == -3)
}
