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

// item is one visible line of the stack view.
type item struct {
	addr  addr
	depth int
	layer *engine.Layer
	first int // first row index of the item, −1 if none
	last  int // last row index (blocks span all their repeats)
}

// buildItems lists the visible items (blocks folded hide their bodies) and
// ties each to its rows in r. Items and rows come in the same order, so one
// forward walk matches them without a lookup table.
func buildItems(s *engine.Stack, r *engine.Result, folded map[string]bool, out []item) []item {
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
			if j < len(r.Rows) && r.Rows[j].Path.HasPrefix(p) {
				it.first, it.last = j, j
				if engine.SpecOf(ls[i].Kind).Body {
					for k := j + 1; k < len(r.Rows) && r.Rows[k].Path.HasPrefix(p); k++ {
						it.last = k
					}
				}
				next = j
				if !engine.SpecOf(ls[i].Kind).Body || folded[a.key()] {
					next = it.last + 1
				}
			}
			out = append(out, it)
			if engine.SpecOf(ls[i].Kind).Body && !folded[a.key()] {
				walk(ls[i].Body, a, depth+1)
				next = max(next, it.last+1)
			}
		}
	}
	walk(s.Layers, nil, 0)
	return out
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
