package onnximport

import (
	"slices"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// Repeated patterns written as units. After folding, the import looks for
// runs of a convolution, a norm and an activation (or a convolution and a
// norm) anywhere in the stack — the top level, block bodies, fork
// branches — and, for each pattern seen often enough, defines one unit
// whose fields that differ between the runs are parameters (the most
// common value the default) and writes each run as a use of it. Then
// constructs at the top level (forks, and blocks that repeat one fork)
// that are the same but for some values become units too. Every unit is
// kept only where it makes the file shorter and the stack computes the
// same rows; where nothing qualifies, the stack has no units.

// minUses is how many runs of a layer pattern make it a unit: below it,
// the definition costs about the lines the uses save.
const minUses = 3

// maxPatterns bounds the patterns tried in each pass, the most used
// first: each try writes the stack once more.
const maxPatterns = 16

// field is one field of one layer of a pattern, by its position.
type field struct {
	layer int // the layer's index in the pattern, in walk order
	p     *engine.Param
	key   string // its key in a binding: the kind's key for its main value
	base  string // the parameter's name when it varies
}

// occurrence is one place a pattern stands: a run of items in a list (or
// one construct, repeated by the block that wraps it).
type occurrence struct {
	list   []*item // the list it stands in
	at, n  int     // its run: list[at:at+n]
	repeat int64   // a construct repeated by a block around it; 0: none
	wrap   *item   // that block
	values []string
	ok     bool // the use expands to exactly the run
}

// pattern is a set of occurrences of one shape.
type pattern struct {
	key    string
	fields []field
	occ    []*occurrence
	unit   engine.Unit
	slot   []int // per field: the unit's parameter it is bound to, or -1
}

// unitize writes repeated patterns of the finished items as units. ls is
// the stack the items build without units; it returns the units and the
// layers written with them, or nil, ls when no unit shortens the file.
func (b *builder) unitize(s *engine.Stack, items []*item, ls []engine.Layer) ([]engine.Unit, []engine.Layer) {
	ref := engine.Evaluate(&engine.Stack{Input: s.Input, Layers: ls})
	if ref.Errors > 0 {
		return nil, ls
	}
	best := lineCount(s, nil, ls)
	if best < 0 {
		return nil, ls
	}
	var units []engine.Unit
	cur, curLs := items, ls
	taken := map[string]bool{}
	// each candidate pattern in turn, the most used first; a pattern is
	// kept when the stack is shorter with it and computes the same rows
	try := func(ps []*pattern, build func(*pattern) []*item) {
		for _, p := range ps[:min(len(ps), maxPatterns)] {
			if !p.define(s, units, taken) {
				continue
			}
			next := build(p)
			nls := dropNoOps(s, buildAll(next))
			us := append(slices.Clone(units), p.unit)
			if n := lineCount(s, us, nls); n >= 0 && n < best && sameLeafRows(ref, s, us, nls) {
				best, units, cur, curLs = n, us, next, nls
				taken[p.unit.Name] = true
			}
		}
	}
	try(b.runPatterns(cur), func(p *pattern) []*item { return b.replace(cur, p) })
	try(b.constructPatterns(cur, units), func(p *pattern) []*item { return b.replace(cur, p) })
	if len(units) == 0 {
		return nil, ls
	}
	// the units in the order the stack first uses them, each after the
	// units it uses
	first := map[string]int{}
	var walk func([]engine.Layer)
	walk = func(ls []engine.Layer) {
		for i := range ls {
			walk(ls[i].Body) // the units a unit uses come before it
			if ls[i].Unit != "" {
				if _, seen := first[ls[i].Unit]; !seen {
					first[ls[i].Unit] = len(first)
				}
			}
		}
	}
	walk(curLs)
	slices.SortStableFunc(units, func(a, c engine.Unit) int { return first[a.Name] - first[c.Name] })
	return units, curLs
}

// lineCount is the number of lines of the stack's file, or −1 when it
// cannot be written and read back the same.
func lineCount(s *engine.Stack, us []engine.Unit, ls []engine.Layer) int {
	c := &engine.Stack{Name: s.Name, Input: s.Input, Units: us, Layers: ls}
	if writable(c) != nil {
		return -1
	}
	data, err := stackfile.Save(c)
	if err != nil {
		return -1
	}
	return strings.Count(string(data), "\n")
}

// sameLeafRows reports whether the stack with units computes every layer
// row of ref: the same shapes, parameters, buffers and MACs, in order.
func sameLeafRows(ref *engine.Result, s *engine.Stack, us []engine.Unit, ls []engine.Layer) bool {
	r := engine.Evaluate(&engine.Stack{Input: s.Input, Units: us, Layers: ls})
	if r.Errors > 0 || r.Totals != ref.Totals {
		return false
	}
	leaf := func(res *engine.Result) []engine.Row {
		var out []engine.Row
		for _, row := range res.Rows {
			if !isConstruct(row.Layer.Kind) {
				out = append(out, engine.Row{In: row.In, Out: row.Out, Params: row.Params, Buffers: row.Buffers, MACs: row.MACs, Role: row.Role})
			}
		}
		return out
	}
	a, c := leaf(ref), leaf(r)
	if len(a) != len(c) {
		return false
	}
	for i := range a {
		if a[i].In != c[i].In || a[i].Out != c[i].Out || a[i].Params != c[i].Params || a[i].Buffers != c[i].Buffers || a[i].MACs != c[i].MACs || a[i].Role != c[i].Role {
			return false
		}
	}
	return true
}

// referenced lists the items a merge or branch reads by name.
func referenced(its []*item, out map[*item]bool) map[*item]bool {
	for _, it := range its {
		if it.from != nil {
			out[it.from] = true
		}
		referenced(it.kids, out)
	}
	return out
}

// runPatterns finds the runs conv → norm → activation and conv → norm in
// every list of the items, grouped by shape: the kinds and the fields no
// parameter can stand for.
func (b *builder) runPatterns(items []*item) []*pattern {
	refs := referenced(items, map[*item]bool{})
	byKey := map[string]*pattern{}
	var order []*pattern
	var walk func(list []*item, depth int)
	walk = func(list []*item, depth int) {
		for i := 0; i < len(list); i++ {
			it := list[i]
			if it.kids != nil {
				d := depth
				if it.l.Kind != engine.KindBranch {
					d++
				}
				walk(it.kids, d)
				continue
			}
			n := runAt(list, i, depth, refs)
			if n == 0 {
				continue
			}
			ls := make([]engine.Layer, n)
			for j := range ls {
				ls[j] = list[i+j].l.Normalized()
			}
			key, fields, values := shapeOf(ls, nil)
			p := byKey[key]
			if p == nil {
				p = &pattern{key: key, fields: fields}
				byKey[key] = p
				order = append(order, p)
			}
			p.occ = append(p.occ, &occurrence{list: list, at: i, n: n, values: values})
			i += n - 1
		}
	}
	walk(items, 0)
	var out []*pattern
	for _, p := range order {
		if len(p.occ) >= minUses {
			out = append(out, p)
		}
	}
	slices.SortStableFunc(out, func(a, c *pattern) int { return len(c.occ) - len(a.occ) })
	return out
}

// runAt is the length of the run conv → norm (→ activation) starting at
// list[i], or 0. A run's layers carry no name, note or link another item
// reads, the list is shallow enough for a use (a block level) to stand in
// it, and a relative width is kept only where the use's input is the
// body's (the run opens a body and is relative to it).
func runAt(list []*item, i, depth int, refs map[*item]bool) int {
	if depth >= engine.MaxBlockDepth || i+1 >= len(list) {
		return 0
	}
	n := 2
	if list[i].l.Kind != engine.KindConv || list[i+1].l.Kind != engine.KindNorm {
		return 0
	}
	if i+2 < len(list) && list[i+2].l.Kind == engine.KindAct {
		n = 3
	}
	for _, it := range list[i : i+n] {
		if it.kids != nil || it.tap || it.from != nil || refs[it] || it.l.Note != "" {
			return 0
		}
		if !it.l.Rel.IsZero() && (i > 0 || depth == 0 || it.l.RelBlock) {
			return 0
		}
	}
	return n
}

// shapeOf describes a pattern's layers: its key (kinds and the values no
// parameter stands for: fields that apply only sometimes, names of other
// outputs, whether a width is relative), the fields a parameter may stand
// for and their values as text.
func shapeOf(ls []engine.Layer, units []engine.Unit) (string, []field, []string) {
	var key strings.Builder
	var fields []field
	var values []string
	var walk func(ls []engine.Layer)
	idx := 0
	walk = func(ls []engine.Layer) {
		for i := range ls {
			l := &ls[i]
			li := idx
			idx++
			sp := engine.SpecOf(l.Kind)
			key.WriteString(sp.Key)
			key.WriteByte('(')
			if l.Unit != "" {
				// a use: its unit, and each parameter's value a field
				key.WriteString("unit " + l.Unit + ";")
				u := engine.UnitIn(units, l.Unit)
				if u == nil {
					key.WriteString("?;")
				} else {
					for _, q := range u.Params {
						v, given := engine.ArgValue(l.Args, q.Name)
						if !given {
							v = q.Default
						}
						fields = append(fields, field{layer: li, key: q.Name, base: q.Name})
						values = append(values, v)
					}
				}
			}
			each := func(p *engine.Param, fkey string) {
				text := p.Field().Get(l)
				if p.Only != nil || p.Type == engine.TRef || p.Type == engine.TShape || l.Unit != "" {
					if p.Applies(l) {
						key.WriteString(fkey + "=" + text + ";")
					}
					return
				}
				if p.Type == engine.TWidth && !l.Rel.IsZero() {
					key.WriteString(fkey + " relative;")
				}
				fields = append(fields, field{layer: li, p: p, key: fkey, base: paramBase(l.Kind, p)})
				values = append(values, text)
			}
			if sp.Main != nil {
				each(sp.Main, sp.Key)
			}
			for j := range sp.Params {
				each(&sp.Params[j], sp.Params[j].Key)
			}
			if l.Unit == "" {
				walk(l.Body)
			}
			key.WriteByte(')')
		}
	}
	walk(ls)
	return key.String(), fields, values
}

// paramBase is the name a varying field's parameter starts from: c for a
// width, the quick-entry prefix where it has one (k, s, p, g), else the
// field's key.
func paramBase(k engine.Kind, p *engine.Param) string {
	switch {
	case p.Type == engine.TWidth:
		return "c"
	case k == engine.KindBlock && engine.SpecOf(k).Main == p:
		return "n" // a stage's repeats
	case engine.SpecOf(k).Main == p:
		return engine.SpecOf(k).Key
	case engine.ValidName(p.Quick) && !slices.Contains(engine.ReservedUseKeys, p.Quick):
		return p.Quick
	}
	return p.Key
}

// define works out the pattern's unit: a parameter for each field whose
// values differ between occurrences (fields that vary together share
// one), its default the most common value; the other fields literal. It
// checks each occurrence expands to exactly its run and reports whether
// enough do. units are the units already defined (a construct's body uses
// them); taken the names in use.
func (p *pattern) define(s *engine.Stack, units []engine.Unit, taken map[string]bool) bool {
	first := p.occLayers(0)
	body := engine.CloneLayers(first)
	clearNames(body)
	p.slot = make([]int, len(p.fields))
	var params []engine.UnitParam
	var vectors [][]string
	used := map[string]int{}
	for f := range p.fields {
		p.slot[f] = -1
		vec := make([]string, len(p.occ))
		same := true
		for o, oc := range p.occ {
			vec[o] = oc.values[f]
			same = same && vec[o] == vec[0]
		}
		if same {
			continue
		}
		if j := slices.IndexFunc(vectors, func(v []string) bool { return slices.Equal(v, vec) }); j >= 0 {
			p.slot[f] = j
			continue
		}
		name := p.fields[f].base
		if used[name]++; used[name] > 1 {
			name += strconv.Itoa(used[name])
		}
		p.slot[f] = len(params)
		params = append(params, engine.UnitParam{Name: name, Default: mostCommon(vec)})
		vectors = append(vectors, vec)
	}
	if len(params) > engine.MaxUnitParams {
		return false
	}
	// bind the varying fields, set to their defaults
	at := flatten(body)
	for f, fd := range p.fields {
		j := p.slot[f]
		if j < 0 {
			continue
		}
		l := at[fd.layer]
		if l.Unit != "" {
			continue // a nested use's argument: written below
		}
		v, err := fd.p.Parse(params[j].Default)
		if err != nil {
			return false
		}
		fd.p.Set(l, v)
		l.Binds = append(l.Binds, engine.Bind{Field: fd.key, Param: params[j].Name})
	}
	for li, l := range at {
		if l.Unit == "" {
			*l = normalizedKeep(*l)
			continue
		}
		// a use: a varying value refers to the unit's parameter ($c), a
		// value the same in every occurrence stays as written
		var args []engine.Arg
		for f, fd := range p.fields {
			if fd.layer != li {
				continue
			}
			if j := p.slot[f]; j >= 0 {
				args = append(args, engine.Arg{Name: fd.key, Value: "$" + params[j].Name})
			} else if v, given := engine.ArgValue(l.Args, fd.key); given {
				args = append(args, engine.Arg{Name: fd.key, Value: v})
			}
		}
		l.Args, l.Body = args, nil // a use's body is its unit's, expanded on loading
	}
	p.unit = engine.Unit{Name: p.name(taken), Params: params, Body: body}
	good := 0
	for o, oc := range p.occ {
		use := p.use(o)
		c := &engine.Stack{Input: s.Input, Units: append(slices.Clone(units), p.unit), Layers: []engine.Layer{use}}
		if engine.ExpandUnits(c) != nil {
			continue
		}
		want := engine.Inline(&engine.Stack{Layers: p.occLayers(o)}).Layers
		clearNames(want)
		got := engine.Inline(c).Layers[0].Body
		relWidths(got)
		relWidths(want)
		if oc.ok = engine.EqualLayers(got, want); oc.ok {
			good++
		}
	}
	return good >= minUses || good >= 2 && p.occ[0].n == 1
}

// relWidths clears the widths a relative width was worked out to, as a
// stack file holds it (the folded layers keep them).
func relWidths(ls []engine.Layer) {
	for i := range ls {
		if !ls[i].Rel.IsZero() {
			ls[i].Filters = 0
		}
		relWidths(ls[i].Body)
	}
}

// normalizedKeep normalizes a layer and keeps its bindings.
func normalizedKeep(l engine.Layer) engine.Layer {
	binds := l.Binds
	l = l.Normalized()
	l.Binds = binds
	return l
}

// flatten lists the layers of ls in walk order, bodies of constructs
// included (not the bodies of uses).
func flatten(ls []engine.Layer) []*engine.Layer {
	var out []*engine.Layer
	for i := range ls {
		out = append(out, &ls[i])
		if ls[i].Unit == "" {
			out = append(out, flatten(ls[i].Body)...)
		}
	}
	return out
}

// clearNames removes the names from layers and their bodies (a unit's
// layers carry none).
func clearNames(ls []engine.Layer) {
	for i := range ls {
		ls[i].Name = ""
		clearNames(ls[i].Body)
	}
}

// mostCommon is the value seen most often, the first seen on a tie.
func mostCommon(vs []string) string {
	n := map[string]int{}
	best := vs[0]
	for _, v := range vs {
		if n[v]++; n[v] > n[best] {
			best = v
		}
	}
	return best
}

// occLayers builds the layers of occurrence o.
func (p *pattern) occLayers(o int) []engine.Layer {
	oc := p.occ[o]
	return buildAll(oc.list[oc.at : oc.at+oc.n])
}

// use is the use of the unit that stands for occurrence o: an argument
// for each parameter whose value is not its default, in the unit's order.
func (p *pattern) use(o int) engine.Layer {
	oc := p.occ[o]
	l := engine.Layer{Kind: engine.KindBlock, Repeat: max(oc.repeat, 1), Unit: p.unit.Name}
	for j, q := range p.unit.Params {
		f := slices.Index(p.slot, j)
		if v := oc.values[f]; v != q.Default {
			l.Args = append(l.Args, engine.Arg{Name: q.Name, Value: v})
		}
	}
	return l
}

// name is the unit's name: after the pattern's kinds for a run
// (conv-norm-act, conv-norm), after what the names of a construct's
// occurrences share (inception3a, inception4b → inception), unique among
// taken.
func (p *pattern) name(taken map[string]bool) string {
	var name string
	if p.occ[0].n > 1 {
		var kinds []string
		for _, it := range p.occ[0].list[p.occ[0].at : p.occ[0].at+p.occ[0].n] {
			kinds = append(kinds, engine.SpecOf(it.l.Kind).Key)
		}
		name = strings.Join(kinds, "-")
	} else {
		var names []string
		for _, oc := range p.occ {
			if n := occName(oc); n != "" {
				names = append(names, n)
			}
		}
		name = sharedPrefix(names)
		if _, isKind := engine.KindByName(name); isKind || name == "" {
			// a kind's own word would read as that kind (RegNet's
			// block1…block4): a stage of blocks, a module of forks
			name = map[engine.Kind]string{engine.KindBlock: "stage", engine.KindFork: "module"}[p.occ[0].list[p.occ[0].at].l.Kind]
			if name == "" {
				name = "unit"
			}
		}
	}
	base := name
	for i := 2; taken[name] || !engine.ValidName(name); i++ {
		if !engine.ValidName(base) {
			base = "unit"
		}
		name = base + "-" + strconv.Itoa(i)
	}
	return name
}

// occName is the name an occurrence carries (a construct's, or that of
// the block repeating it).
func occName(oc *occurrence) string {
	if oc.wrap != nil && oc.wrap.l.Name != "" {
		return oc.wrap.l.Name
	}
	return oc.list[oc.at].l.Name
}

// sharedPrefix is what the names begin with in common, without a trailing
// separator; one name loses a last letter after a digit (Mixed_5b →
// Mixed_5).
func sharedPrefix(names []string) string {
	if len(names) == 0 {
		return ""
	}
	pre := names[0]
	for _, n := range names[1:] {
		k := 0
		for k < len(pre) && k < len(n) && pre[k] == n[k] {
			k++
		}
		pre = pre[:k]
	}
	if len(names) == 1 && len(pre) > 1 {
		if c, d := pre[len(pre)-1], pre[len(pre)-2]; c >= 'a' && c <= 'z' && d >= '0' && d <= '9' {
			pre = pre[:len(pre)-1]
		}
	}
	return strings.TrimRight(pre, "_-")
}

// replace writes every checked occurrence of p in the items as a use; the
// items themselves are not changed (a list that changes is copied).
func (b *builder) replace(items []*item, p *pattern) []*item {
	at := map[*item]int{}
	for o, oc := range p.occ {
		if !oc.ok {
			continue
		}
		if oc.wrap != nil {
			at[oc.wrap] = o
		} else {
			at[oc.list[oc.at]] = o
		}
	}
	var walk func([]*item) []*item
	walk = func(list []*item) []*item {
		var out []*item
		changed := false
		for i := 0; i < len(list); i++ {
			it := list[i]
			if o, ok := at[it]; ok {
				oc := p.occ[o]
				out = append(out, b.useItem(p, o, it))
				if oc.wrap == nil {
					i += oc.n - 1
				}
				changed = true
				continue
			}
			if it.kids != nil {
				if kids := walk(it.kids); kids != nil {
					c := *it
					c.kids = kids
					it, changed = &c, true
				}
			}
			out = append(out, it)
		}
		if !changed {
			return nil
		}
		return out
	}
	if out := walk(items); out != nil {
		return out
	}
	return items
}

// useItem is the item of a use standing for occurrence o (whose first
// item, or wrapping block, is it): it holds the occurrence's items with
// their names cleared, and takes a name where the occurrence had one.
func (b *builder) useItem(p *pattern, o int, it *item) *item {
	oc := p.occ[o]
	use := &item{l: p.use(o)}
	named := ""
	for _, k := range oc.list[oc.at : oc.at+oc.n] {
		c := *k
		if named == "" {
			named = c.l.Name
		}
		c.l.Name = ""
		if p.occ[0].n == 1 { // a construct: its parts keep no names either
			c.kids = unnamed(c.kids)
		}
		use.kids = append(use.kids, &c)
		use.out = c.out
	}
	switch {
	case oc.wrap != nil:
		use.l.Name = oc.wrap.l.Name
	case oc.n == 1:
		use.l.Name = oc.list[oc.at].l.Name
	case named != "":
		use.l.Name = b.runName(use, named)
	}
	return use
}

// runName names a use standing for a run that had a name: after the
// module the run's nodes make up whole (/Conv2d_1a_3x3/conv/Conv,
// /Conv2d_1a_3x3/bn/…, /Conv2d_1a_3x3/Relu → Conv2d_1a_3x3), else the
// name its first layer had.
func (b *builder) runName(use *item, had string) string {
	split := func(k int) []string {
		parts := strings.FieldsFunc(b.g.nodes[k].GetName(), func(r rune) bool { return r == '/' })
		if len(parts) > 1 {
			parts = parts[:len(parts)-1]
		}
		return parts
	}
	ns := allNodes(use)
	if len(ns) == 0 {
		return had
	}
	common := split(ns[0])
	in := map[int]bool{}
	for _, k := range ns {
		in[k] = true
		parts := split(k)
		n := 0
		for n < len(common) && n < len(parts) && common[n] == parts[n] {
			n++
		}
		common = common[:n]
	}
	if len(common) == 0 {
		return had
	}
	for k := range b.g.nodes {
		if parts := split(k); !in[k] && len(parts) >= len(common) && slices.Equal(parts[:len(common)], common) {
			return had // the module holds more than the run
		}
	}
	if name := b.unique(sanitise(common[len(common)-1])); name != "" {
		return name
	}
	return had
}

// unnamed copies an item tree without names.
func unnamed(its []*item) []*item {
	if its == nil {
		return nil
	}
	out := make([]*item, len(its))
	for i, it := range its {
		c := *it
		c.l.Name = ""
		c.kids = unnamed(c.kids)
		out[i] = &c
	}
	return out
}

// constructPatterns finds the forks at the top level (alone, or repeated
// by a block that holds nothing else) that have the same shape, values
// aside. A use of their unit is one more level around the fork, so a
// fork nested too deeply for that is left as it is; so is one that holds
// a name another item reads.
func (b *builder) constructPatterns(items []*item, units []engine.Unit) []*pattern {
	refs := referenced(items, map[*item]bool{})
	byKey := map[string]*pattern{}
	var order []*pattern
	for _, it := range items {
		oc := &occurrence{list: items, n: 1}
		oc.at = slices.Index(items, it)
		fork := it
		switch {
		case it.l.Kind == engine.KindBlock && it.l.Unit == "" && len(it.kids) >= 2:
			// a stage: the block itself, its repeat count a value like any
			// other (EfficientNet's MBConv stages, ResNet's layer1…4)
		case it.l.Kind == engine.KindBlock && it.l.Unit == "" && len(it.kids) == 1 && it.kids[0].l.Kind == engine.KindFork:
			plain := it.l.Normalized()
			plain.Name, plain.Body = "", nil
			if !plain.Equal(&engine.Layer{Kind: engine.KindBlock, Repeat: plain.Repeat}) || it.tap || refs[it] {
				continue
			}
			fork = it.kids[0]
			oc.list, oc.at, oc.repeat, oc.wrap = it.kids, 0, max(it.l.Repeat, 1), it
		}
		if fork.l.Kind != engine.KindFork && fork.l.Kind != engine.KindBlock || fork.l.Note != "" || linked(fork, refs) {
			continue
		}
		l := build(fork)
		if 1+levels(&l) > engine.MaxBlockDepth {
			continue
		}
		key, fields, values := shapeOf([]engine.Layer{l}, units)
		oc.values = values
		p := byKey[key]
		if p == nil {
			p = &pattern{key: key, fields: fields}
			byKey[key] = p
			order = append(order, p)
		}
		p.occ = append(p.occ, oc)
	}
	var out []*pattern
	for _, p := range order {
		if len(p.occ) >= 2 {
			out = append(out, p)
		}
	}
	slices.SortStableFunc(out, func(a, c *pattern) int { return len(c.occ) - len(a.occ) })
	return out
}

// linked reports whether an item's parts read or are read by name (the
// item itself may be a tap: its use takes its name).
func linked(it *item, refs map[*item]bool) bool {
	for _, k := range it.kids {
		if k.tap || k.from != nil || refs[k] || linked(k, refs) {
			return true
		}
	}
	return it.from != nil
}

// levels is how many nesting levels a layer opens: blocks, gates, forks
// and uses one each (a branch belongs to its fork's level).
func levels(l *engine.Layer) int {
	n := 0
	for i := range l.Body {
		n = max(n, levels(&l.Body[i]))
	}
	if isConstruct(l.Kind) && l.Kind != engine.KindBranch {
		n++
	}
	return n
}
