package onnximport

import (
	"fmt"
	"strings"

	"stackfit/engine"
)

// finish turns the items read into the stack's layers: consecutive
// identical units merge into one block with a repeat count, the
// constructs and weighted layers get names from the graph's node names,
// and the flattens a person would not write are left out.
func (b *builder) finish(s *engine.Stack, items []*item) []engine.Layer {
	items = b.merge(items)
	for _, it := range items {
		if it.tap || it.l.Kind.HasWeights() || it.l.Kind == engine.KindBlock || it.l.Kind == engine.KindFork || it.l.Kind == engine.KindGate {
			it.l.Name = b.name(it)
		}
	}
	var walk func([]*item)
	walk = func(its []*item) { // taps inside constructs
		for _, it := range its {
			if it.tap && it.l.Name == "" {
				it.l.Name = b.name(it)
			}
			walk(it.kids)
		}
	}
	walk(items)
	ls := make([]engine.Layer, len(items))
	for i, it := range items {
		ls[i] = build(it)
	}
	return dropNoOps(s, ls)
}

// merge folds each unit that repeats the block before it into that
// block's repeat count, in every body too. A later repeat must be the
// first with its strides set to 1 (the stack's blocks stride in their
// first repeat only), add its input unchanged (the first may project it)
// and be read by nothing but the next item.
func (b *builder) merge(items []*item) []*item {
	var out []*item
	for _, it := range items {
		it.kids = b.merge(it.kids)
		if len(out) > 0 {
			if run := out[len(out)-1]; repeats(run, it) {
				run.l.Repeat = max(run.l.Repeat, 1) + 1
				run.nodes = append(run.nodes, allNodes(it)...)
				run.out = it.out
				continue
			}
		}
		out = append(out, it)
	}
	return out
}

// repeats reports whether unit c is a further repeat of block run.
func repeats(run, c *item) bool {
	if run.l.Kind != engine.KindBlock || c.l.Kind != engine.KindBlock || run.tap || c.tap || c.projection ||
		run.l.Residual != c.l.Residual || run.l.DenseLinks != c.l.DenseLinks ||
		run.l.HasPostAct != c.l.HasPostAct || run.l.PostAct != c.l.PostAct {
		return false
	}
	first, later := buildAll(run.kids), buildAll(c.kids)
	unstride(first)
	return engine.EqualLayers(first, later)
}

// unstride sets every stride in ls to 1, as a block's later repeats run.
func unstride(ls []engine.Layer) {
	for i := range ls {
		l := &ls[i]
		switch l.Kind {
		case engine.KindConv, engine.KindDeconv, engine.KindPool:
			l.Stride = engine.Square(1)
			*l = l.Normalized()
		}
		unstride(l.Body)
	}
}

// build turns an item into its layer.
func build(it *item) engine.Layer {
	l := it.l
	switch l.Kind {
	case engine.KindBlock, engine.KindGate, engine.KindFork, engine.KindBranch:
		l.Body = buildAll(it.kids)
	case engine.KindConcat:
		l.From = it.from.l.Name
	}
	return l
}

func buildAll(its []*item) []engine.Layer {
	if len(its) == 0 {
		return nil
	}
	ls := make([]engine.Layer, len(its))
	for i, it := range its {
		ls[i] = build(it)
	}
	return ls
}

// allNodes lists the graph nodes an item and its parts were read from.
func allNodes(it *item) []int {
	ns := append([]int(nil), it.nodes...)
	for _, k := range it.kids {
		ns = append(ns, allNodes(k)...)
	}
	return ns
}

// name names an item after its graph nodes: a layer after the module its
// node belongs to ("/layer1/layer1.0/conv1/Conv" → conv1), a construct
// after the deepest module holding all its nodes (layer1.0's nodes →
// layer1_0, the merged repeats of layer1 → layer1), sanitised to the
// stack file's rules and made unique.
func (b *builder) name(it *item) string {
	var common []string
	for i, k := range allNodes(it) {
		parts := strings.FieldsFunc(b.g.nodes[k].GetName(), func(r rune) bool { return r == '/' })
		if len(parts) > 1 {
			parts = parts[:len(parts)-1] // the operator's own part
		}
		if i == 0 {
			common = parts
			continue
		}
		n := 0
		for n < len(common) && n < len(parts) && common[n] == parts[n] {
			n++
		}
		common = common[:n]
	}
	if len(common) == 0 {
		return ""
	}
	return b.unique(sanitise(common[len(common)-1]))
}

// unique makes a name unique among those given.
func (b *builder) unique(s string) string {
	if s == "" {
		return ""
	}
	base := s
	for i := 2; b.names[s]; i++ {
		s = fmt.Sprintf("%s-%d", base, i)
	}
	b.names[s] = true
	return s
}

// sanitise keeps what the stack file's names allow (letters, digits, '_'
// and '-', starting with a letter), other runs becoming one '_'.
func sanitise(name string) string {
	var sb strings.Builder
	for _, r := range name {
		if sb.Len() >= engine.MaxNameLen-4 {
			break
		}
		switch {
		case r < 128 && (r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9'), r == '_', r == '-':
			sb.WriteRune(r)
		case sb.Len() > 0:
			sb.WriteByte('_')
		}
	}
	s := strings.Trim(sb.String(), "_-")
	for len(s) > 0 && !(s[0] >= 'a' && s[0] <= 'z' || s[0] >= 'A' && s[0] <= 'Z') {
		s = s[1:]
	}
	return s
}

// dropNoOps leaves out what a person would not write: a flatten whose
// input is already flat (C×1×1; the exporter writes one before every
// dense layer), and a pooling that changes nothing (window 1, stride 1,
// no padding: an adaptive pooling to the size the map already has).
func dropNoOps(s *engine.Stack, ls []engine.Layer) []engine.Layer {
	r := engine.Evaluate(&engine.Stack{Input: s.Input, Layers: ls})
	if r.Errors > 0 {
		return ls
	}
	flatIn := map[int]bool{}
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Path.Len() == 1 && row.Layer.Kind == engine.KindFlatten && row.In.H == 1 && row.In.W == 1 {
			flatIn[row.Path.At(0)-1] = true
		}
	}
	out := ls[:0:0]
	for i := range ls {
		l := &ls[i]
		noPool := l.Kind == engine.KindPool && l.Kernel == engine.Square(1) && l.EffectiveStride() == engine.Square(1) && l.Pad == (engine.Padding{})
		if flatIn[i] || noPool {
			continue
		}
		out = append(out, *l)
	}
	return out
}
