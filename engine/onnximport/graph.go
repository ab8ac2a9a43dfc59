package onnximport

import (
	"fmt"
	"slices"
	"strings"

	"stackfit/engine/onnximport/onnxpb"
)

// graph is a model's computation with the constant and shape-computing
// subgraphs folded away: the nodes that compute on the data, in the
// file's order (ONNX requires a topological one), with who reads what.
type graph struct {
	nodes []*onnxpb.Node
	pos   []int          // each node's 1-based position in the file
	data  [][]string     // each node's computed inputs, in order, aliases resolved
	prod  map[string]int // tensor → the node that computes it
	cons  map[string][]int
	// shapes are the computed tensors' full shapes (the batch as the
	// file gives it), where the operators that compute them are known.
	shapes map[string][]int64
	// ipdom is each node's immediate post-dominator: the first node every
	// path from it to the graph's output passes through; len(nodes) is
	// the output itself.
	ipdom []int
}

// graph folds g's constant nodes and links the rest, starting from the
// data input x. A node that reads a tensor no earlier node computes (a
// graph out of order, cyclic or dangling) is an error.
func (im *importer) graph(g *onnxpb.Graph, x string) (*graph, error) {
	gr := &graph{prod: map[string]int{}, cons: map[string][]int{}, shapes: map[string][]int64{}}
	if sh := inputShape(g, x); sh != nil {
		gr.shapes[x] = sh
	}
	alias := map[string]string{}
	resolve := func(t string) string {
		if a, ok := alias[t]; ok {
			return a
		}
		return t
	}
	concats := map[string]string{} // a concatenation's inputs, joined, → its output
	for i, n := range g.GetNode() {
		pos := i + 1
		op := n.GetOpType()
		if len(n.GetOutput()) == 0 {
			return nil, &Stopped{Node: n.GetName(), Op: op, Position: pos, Why: "it has no output"}
		}
		if op == "Constant" || op == "Shape" || im.constOnly(n) {
			for _, o := range n.GetOutput() {
				im.consts[o] = &onnxpb.Tensor{} // folded
			}
			if ins := n.GetInput(); op == "Identity" && len(ins) == 1 && im.initial[ins[0]] {
				// The exporter routes a weight shared between layers (or
				// equal folded values it deduplicated) through Identity:
				// the output is that weight, counted again by each layer
				// that reads it.
				im.consts[n.GetOutput()[0]], im.initial[n.GetOutput()[0]] = im.consts[ins[0]], true
			}
			if len(n.GetOutput()) == 1 {
				im.fold(n)
				im.unsqueezeWeight(n)
			}
			if ins := n.GetInput(); len(ins) == 1 && len(n.GetOutput()) == 1 {
				im.foldData(n, gr.shapes[resolve(ins[0])])
			}
			im.res.Read++
			continue
		}
		var data []string
		for _, in := range n.GetInput() {
			if _, ok := im.consts[in]; ok || in == "" {
				continue
			}
			in = resolve(in)
			if _, ok := gr.prod[in]; !ok && in != x {
				return nil, &Stopped{Node: n.GetName(), Op: op, Position: pos,
					Why: fmt.Sprintf("it reads %q, which no earlier node computes: the graph is out of order, cyclic or dangling", in)}
			}
			data = append(data, in)
		}
		out := n.GetOutput()[0]
		switch {
		case len(data) == 1 && (op == "Identity" || op == "Unsqueeze" || op == "Squeeze" || op == "Concat"):
			// N×C and N×C×1×1 are the same flow to a stack (a dense
			// layer's output is N×units×1×1); a concatenation of one
			// tensor is the tensor.
			alias[out] = data[0]
			if sh, ok := gr.shapes[data[0]]; ok {
				gr.shapes[out] = sh
			}
			im.res.Read++
			continue
		case op == "Concat" && len(data) > 2:
			// torch.cat(features) over a growing list (DenseNet's dense
			// block) is read as the concatenation of the previous list's
			// concatenation and the newest tensor.
			key := strings.Join(data, "\x00")
			if prev, ok := concats[strings.Join(data[:len(data)-1], "\x00")]; ok {
				concats[key] = out
				data = []string{prev, data[len(data)-1]}
			} else {
				concats[key] = out
			}
		case op == "Concat":
			concats[strings.Join(data, "\x00")] = out
		}
		im.infer(n, func(t string) []int64 { return gr.shapes[resolve(t)] }, gr.shapes)
		k := len(gr.nodes)
		gr.nodes = append(gr.nodes, n)
		gr.pos = append(gr.pos, pos)
		gr.data = append(gr.data, data)
		for _, in := range data {
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
	outputs := map[string]bool{}
	for _, o := range g.GetOutput() {
		outputs[resolve(o.GetName())] = true
	}
	im.rewrite(gr, outputs)
	gr.postDominators(outputs)
	return gr, nil
}

// postDominators fills ipdom, in reverse order: a node's immediate
// post-dominator is the nearest common post-dominator of the nodes that
// read its outputs (Cooper, Harvey and Kennedy's intersection, on a
// topological order).
func (gr *graph) postDominators(outputs map[string]bool) {
	n := len(gr.nodes)
	gr.ipdom = make([]int, n+1)
	gr.ipdom[n] = n
	for i := n - 1; i >= 0; i-- {
		d := -1
		for _, o := range gr.nodes[i].GetOutput() {
			if outputs[o] {
				d = n
			}
			for _, c := range gr.cons[o] {
				if d < 0 {
					d = c
				} else {
					d = gr.meet(d, c)
				}
			}
		}
		if d < 0 {
			d = n
		}
		gr.ipdom[i] = d
	}
}

// meet is the first node at or after both a and b that every path from
// either passes through.
func (gr *graph) meet(a, b int) int {
	for a != b {
		if a < b {
			a = gr.ipdom[a]
		} else {
			b = gr.ipdom[b]
		}
	}
	return a
}

// join is the node where the paths from the readers cs meet again.
func (gr *graph) join(cs []int) int {
	j := cs[0]
	for _, c := range cs[1:] {
		j = gr.meet(j, c)
	}
	return j
}

// reads reports whether node k reads tensor t.
func (gr *graph) reads(k int, t string) bool { return slices.Contains(gr.data[k], t) }

// constOnly reports whether every input of n is a constant: the node is
// part of a constant or shape-computing subgraph and is folded.
func (im *importer) constOnly(n *onnxpb.Node) bool {
	for _, in := range n.GetInput() {
		if _, ok := im.consts[in]; !ok && in != "" {
			return false
		}
	}
	return true
}
