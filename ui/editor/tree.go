package editor

import (
	"strconv"
	"strings"

	"stackfit/engine"
)

// addr locates a layer in the stack: indices into the top-level list, then
// into each enclosing block's body.
type addr []int

// key is a stable string form of the address, for maps.
func (a addr) key() string {
	var b strings.Builder
	for i, v := range a {
		if i > 0 {
			b.WriteByte('/')
		}
		b.WriteString(strconv.Itoa(v))
	}
	return b.String()
}

// parent returns the address of the enclosing block (nil at top level).
func (a addr) parent() addr {
	if len(a) <= 1 {
		return nil
	}
	return a[:len(a)-1]
}

func (a addr) with(last int) addr {
	out := append(addr(nil), a...)
	out[len(out)-1] = last
	return out
}

// list returns the slice holding the layer at a, and its index there.
func list(s *engine.Stack, a addr) (*[]engine.Layer, int) {
	ls := &s.Layers
	for _, v := range a[:len(a)-1] {
		if v < 0 || v >= len(*ls) {
			return nil, -1
		}
		ls = &(*ls)[v].Body
	}
	i := a[len(a)-1]
	if i < 0 || i > len(*ls) {
		return nil, -1
	}
	return ls, i
}

// at returns the layer at a, or nil.
func at(s *engine.Stack, a addr) *engine.Layer {
	if len(a) == 0 {
		return nil
	}
	ls, i := list(s, a)
	if ls == nil || i >= len(*ls) {
		return nil
	}
	return &(*ls)[i]
}

// item is one visible line of the stack view: an item of the stack, or
// one the engine generates from it (gen is set).
type item struct {
	addr  addr // the item's place in the stack; a generated one's block
	depth int
	layer *engine.Layer // the stack's layer; a generated row's own
	first int           // first row index of the item, −1 if none
	last  int           // last row index (blocks span all their repeats)
	gen   *generated
}

// generated describes a line the engine makes rather than the file holds:
// a row it adds (a projection shortcut, a residual addition and the
// activation after it, a gate's multiplication, a fork's join, a dense
// link's concatenation), the header of a later repeat of a block, or a row
// of such a repeat. They can be selected and explained, never edited.
type generated struct {
	repeat int    // > 0: the header of this repeat of the block at addr
	of     int    // the block's repeats
	key    string // a header's fold key (opened when set in Model.opened)
	what   string // says what it is, for messages: "row 5.2.add"
}

// repeatKey is the fold key of repeat r of the block at a.
func repeatKey(a addr, r int) string { return a.key() + "/r" + strconv.Itoa(r) }

// buildItems lists the visible items and ties each to its rows in r.
// Folded items of the stack hide what is inside; a block unfolded shows
// the layers of its first repeat, the rows the engine adds to it, and a
// header for each later repeat, whose rows show when it is opened. Items
// and rows come in the same order, so one forward walk matches them
// without a lookup table.
func buildItems(s *engine.Stack, r *engine.Result, folded, opened map[string]bool, out []item) []item {
	out = out[:0]
	next := 0 // first row not yet claimed by an earlier item
	var walk func(ls []engine.Layer, parent addr, depth int)
	walk = func(ls []engine.Layer, parent addr, depth int) {
		for i := range ls {
			a := append(append(addr(nil), parent...), i)
			it := item{addr: a, depth: depth, layer: &ls[i], first: -1, last: -1}
			p := s.ItemPath(a)
			j := next
			for j < len(r.Rows) && !r.Rows[j].Path.HasPrefix(p) && !beyond(r.Rows[j].Path, p) {
				j++
			}
			body := engine.SpecOf(ls[i].Kind).Body
			if j < len(r.Rows) && r.Rows[j].Path.HasPrefix(p) {
				it.first, it.last = j, j
				if body {
					for k := j + 1; k < len(r.Rows) && r.Rows[k].Path.HasPrefix(p); k++ {
						it.last = k
					}
				}
				next = j
				if !body || folded[a.key()] {
					next = it.last + 1
				}
			}
			out = append(out, it)
			if body && !folded[a.key()] {
				walk(ls[i].Body, a, depth+1)
				if it.first >= 0 {
					out = generatedItems(out, r, &ls[i], a, p, depth, max(next, it.first), it.last, opened)
				}
				next = max(next, it.last+1)
			}
		}
	}
	walk(s.Layers, nil, 0)
	return out
}

// generatedItems adds the lines for rows from..last of the unfolded item
// l at a (path p) that its own items did not claim: the rows the engine
// adds to its first repeat, then a header per later repeat, with that
// repeat's rows when it is opened.
func generatedItems(out []item, r *engine.Result, l *engine.Layer, a addr, p engine.Path, depth, from, last int, opened map[string]bool) []item {
	repeatOf := func(k int) int {
		if l.Kind != engine.KindBlock || r.Rows[k].Path.Len() <= p.Len() {
			return 1
		}
		return r.Rows[k].Path.At(p.Len())
	}
	for k := from; k <= last && k < len(r.Rows); {
		rep := repeatOf(k)
		if rep <= 1 {
			out = append(out, rowItem(r, k, a, p, depth+1))
			k++
			continue
		}
		end := k
		for end+1 <= last && end+1 < len(r.Rows) && repeatOf(end+1) == rep {
			end++
		}
		key := repeatKey(a, rep)
		out = append(out, item{addr: a, depth: depth + 1, layer: l, first: k, last: end,
			gen: &generated{repeat: rep, of: int(max(l.Repeat, 1)), key: key, what: "repeat " + strconv.Itoa(rep) + " of block " + p.String()}})
		if opened[key] {
			for q := k; q <= end; q++ {
				it := rowItem(r, q, a, p, depth+2)
				it.depth += max(r.Rows[q].Path.Len()-p.Len()-2, 0) / 2
				out = append(out, it)
			}
		}
		k = end + 1
	}
	return out
}

// rowItem is the generated line of row k, inside the item at a (path p).
func rowItem(r *engine.Result, k int, a addr, p engine.Path, depth int) item {
	row := &r.Rows[k]
	return item{addr: a, depth: depth, layer: row.Layer, first: k, last: k,
		gen: &generated{what: "row " + row.Path.String() + " (" + row.Role.String() + ", made by " + p.String() + ")"}}
}

// beyond reports whether row path q comes after every row of item path p
// (their first differing regular segment is larger in q).
func beyond(q, p engine.Path) bool {
	for i := 0; i < p.Len() && i < q.Len(); i++ {
		if q.At(i) != p.At(i) {
			return q.At(i) > p.At(i)
		}
	}
	return false
}

// itemTotals sums the rows of an item in res: the parameters and MACs of
// the resolved rows, and the activation bytes mem keeps for each row.
func itemTotals(it *item, res *engine.Result, mem *engine.Memory) (params, macs, act int64) {
	if it.first < 0 {
		return 0, 0, 0
	}
	for i := it.first; i <= it.last && i < len(res.Rows); i++ {
		if r := &res.Rows[i]; r.Status == engine.StatusOK {
			params += r.Params
			macs += r.MACs
		}
		if i < len(mem.Rows) {
			act += mem.Rows[i]
		}
	}
	return params, macs, act
}

// selectAddr moves the cursor to the item at a, unfolding its blocks.
func (t *stackTree) selectAddr(a addr, s *engine.Stack, r *engine.Result) {
	unfolded := false
	for n := 1; n < len(a); n++ {
		k := addr(a[:n]).key()
		if t.folded[k] {
			delete(t.folded, k)
			unfolded = true
		}
	}
	if unfolded {
		t.rebuild(s, r)
	}
	want := a.key()
	for i := range t.items {
		if t.items[i].addr.key() == want {
			t.cursor = i
			return
		}
	}
}

// rebuild lists the visible items again (after a change or a fold).
func (t *stackTree) rebuild(s *engine.Stack, r *engine.Result) {
	t.items = buildItems(s, r, t.folded, t.opened, t.items)
	most := 0
	for i := range t.items {
		most = max(most, t.items[i].addr[len(t.items[i].addr)-1]+1)
	}
	t.numWidth = len(strconv.Itoa(most))
	t.clamp()
}

func (t *stackTree) clamp() {
	if t.cursor >= len(t.items) {
		t.cursor = len(t.items) - 1
	}
	if t.cursor < 0 {
		t.cursor = 0
	}
	if t.anchor >= len(t.items) {
		t.anchor = -1
	}
}

// current returns the selected item, or nil for an empty stack.
func (t *stackTree) current() *item {
	if t.cursor < 0 || t.cursor >= len(t.items) {
		return nil
	}
	return &t.items[t.cursor]
}

// scroll keeps the cursor inside the visible rows.
func (t *stackTree) scroll(h int) {
	h = max(h, 1)
	if t.cursor < t.offset {
		t.offset = t.cursor
	}
	if t.cursor >= t.offset+h {
		t.offset = t.cursor - h + 1
	}
	if t.offset > max(len(t.items)-h, 0) {
		t.offset = max(len(t.items)-h, 0)
	}
	if t.offset < 0 {
		t.offset = 0
	}
}
