package onnximport

import (
	"fmt"
	"slices"
	"strings"

	"stackfit/engine"
)

// finish turns the items read into the stack's layers: repeated units
// fold into blocks with repeat counts and relative widths, one-unit
// stages read from one module become blocks of one repeat, the
// constructs and weighted layers get names from the graph's node names,
// and the flattens a person would not write are left out. The folded
// stack must compute what the unfolded one does, row for row; where it
// does not, the simpler merge of identical repeats is kept, and where
// even that differs, the items as read. Then repeated patterns become
// units where that shortens the file (unitize); s.Units holds them.
func (b *builder) finish(s *engine.Stack, items []*item) []engine.Layer {
	f := newFolder(s, items)
	merged, plain := cloneItems(items), cloneItems(items)
	tries := []func() []*item{
		func() []*item { return f.groupModules(b, f.fold(items, 0)) },
		func() []*item { return b.merge(merged) },
		func() []*item { return plain },
	}
	var ls []engine.Layer
	var its []*item
	for i, try := range tries {
		b.names = map[string]bool{}
		its = try()
		ls = b.layers(s, f, its)
		if i == len(tries)-1 || f.sameRows(s, ls) {
			break
		}
	}
	// RegNet's group width first, so that units are written with it.
	if w, r := sharedGroupWidth(s, ls); w > 0 {
		if nls, same := withGroupWidth(s, ls, w, r); same {
			ls = nls
			walkItems(its, func(it *item) {
				if grouped(&it.l) {
					it.l.Groups, it.l.GroupWidth = 0, w
				}
			})
		}
	}
	s.Units, ls = b.unitize(s, its, ls)
	return ls
}

// walkItems calls fn on every item of its, parts included.
func walkItems(its []*item, fn func(*item)) {
	for _, it := range its {
		fn(it)
		walkItems(it.kids, fn)
	}
}

// layers names the items and builds their layers.
func (b *builder) layers(s *engine.Stack, f *folder, items []*item) []engine.Layer {
	for _, it := range items {
		if g, ok := f.group[it]; ok {
			it.l.Name = b.unique(sanitise(g))
			continue
		}
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
	}
	if it.from != nil { // a named concatenation, or a branch from a named output
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
// layer1-0, the merged repeats of layer1 → layer1). A construct that holds
// only some of that module's parts is named after the first and last of
// them (features.2 to features.3 → features-2-3). The name is sanitised
// to the stack file's rules and made unique.
func (b *builder) name(it *item) string {
	split := func(k int) []string {
		parts := strings.FieldsFunc(b.g.nodes[k].GetName(), func(r rune) bool { return r == '/' })
		if len(parts) > 1 {
			parts = parts[:len(parts)-1] // the operator's own part
		}
		return parts
	}
	ns := allNodes(it)
	var common []string
	for i, k := range ns {
		parts := split(k)
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
		return b.spanName(it, ns, split)
	}
	last := common[len(common)-1]
	if isConstruct(it.l.Kind) {
		// the module's parts below common that the item holds, in order
		next := func(k int) string {
			if parts := split(k); len(parts) > len(common) && slices.Equal(parts[:len(common)], common) {
				return parts[len(common)]
			}
			return ""
		}
		held := map[string]bool{}
		var first, end string
		lo, hi := len(b.g.nodes), -1
		for _, k := range ns {
			if p := next(k); p != "" {
				held[p] = true
				if k < lo {
					lo, first = k, p
				}
				if k > hi {
					hi, end = k, p
				}
			}
		}
		whole := true
		for k := range b.g.nodes {
			if p := next(k); p != "" && !held[p] {
				whole = false
				break
			}
		}
		if !whole && first != end {
			tail := func(p string) string { return strings.TrimPrefix(p, last+".") }
			return b.unique(sanitise(last + "." + tail(first) + "." + tail(end)))
		}
	}
	return b.unique(sanitise(last))
}

// spanName names a construct whose nodes share no module, one that spans
// top-level modules (Inception v3's Mixed_5c and Mixed_5d, merged into one
// repeated block): after the first and the last, their shared beginning
// written once (Mixed_5c-d). Anything else has no name.
func (b *builder) spanName(it *item, ns []int, split func(int) []string) string {
	if !isConstruct(it.l.Kind) || len(ns) == 0 {
		return ""
	}
	lo, hi := ns[0], ns[0]
	for _, k := range ns {
		lo, hi = min(lo, k), max(hi, k)
	}
	a, z := split(lo), split(hi)
	if len(a) == 0 || len(z) == 0 || a[0] == z[0] {
		return ""
	}
	first, end := a[0], z[0]
	n := 0
	for n < len(first) && n < len(end) && first[n] == end[n] {
		n++
	}
	return b.unique(sanitise(first + "-" + end[n:]))
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
// and '-', starting with a letter): a module path's dots become '-' and
// other runs of what is not allowed one '_'. A name too long for the
// stack file (with room left for a suffix that makes it unique) ends at
// the last whole word that fits.
func sanitise(name string) string {
	var sb strings.Builder
	sep := byte(0)
	for _, r := range name {
		switch {
		case r < 128 && (r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9'), r == '_', r == '-':
			if sb.Len() == 0 && !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z') {
				continue // a name starts with a letter
			}
			if sep != 0 {
				sb.WriteByte(sep)
				sep = 0
			}
			sb.WriteRune(r)
		case sb.Len() > 0:
			if r == '.' && sep == 0 {
				sep = '-'
			} else {
				sep = '_'
			}
		}
	}
	s := strings.Trim(sb.String(), "_-")
	if limit := engine.MaxNameLen - 4; len(s) > limit {
		cut := strings.LastIndexAny(s[:limit+1], "_-")
		if cut <= 0 {
			cut = limit // one word longer than a name: nothing better to cut at
		}
		s = strings.Trim(s[:cut], "_-")
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
