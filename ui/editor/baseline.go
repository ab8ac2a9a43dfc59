package editor

import "stackfit/engine"

// baseline is a marked earlier state the view compares against.
type baseline struct {
	params, macs, memory int64
	entries              []entry // every item of the marked stack, in order
	// matched maps each item of the current stack (by address key) to the
	// parameters of the marked item it corresponds to; an item missing
	// from it is new. Worked out once per change (match).
	matched map[string]int64
}

// entry is one item of a stack, flattened in order, for matching.
type entry struct {
	layer  *engine.Layer
	key    string // its address
	params int64
}

// entries flattens every item of the stack (whatever is folded) with the
// parameters of its rows.
func entries(s *engine.Stack, r *engine.Result, mem *engine.Memory) []entry {
	all := buildItems(s, r, nil, nil, nil)
	out := make([]entry, 0, len(all))
	for i := range all {
		it := &all[i]
		if it.gen != nil {
			continue
		}
		p, _, _ := itemTotals(it, r, mem)
		out = append(out, entry{layer: it.layer, key: it.addr.key(), params: p})
	}
	return out
}

// same reports whether two entries are the same item: the same fields (a
// block's own fields; its body is matched item by item). Depth is left
// out, so layers wrapped in a block still match themselves.
func same(a, b *entry) bool { return a.layer.EqualFields(b.layer) }

// similar reports whether b may be an edited a: the same kind.
func similar(a, b *entry) bool { return a.layer.Kind == b.layer.Kind }

// maxAlign bounds the differing stretch aligned item by item (an LCS of
// n×n cells); past it the stretch is paired by position.
const maxAlign = 400

// match pairs each current item with the marked item it corresponds to:
// items equal to one of the marked ones in order (a longest common
// subsequence after the unchanged start and end), and between two such
// pairs, items of the same kind in order (edited layers). Inserting a
// layer so leaves every other item matched to itself, however their
// numbers shift.
func match(old, cur []entry) map[string]int64 {
	out := make(map[string]int64, len(cur))
	pair := func(i, j int) { out[cur[j].key] = old[i].params }
	lo := 0
	for lo < len(old) && lo < len(cur) && same(&old[lo], &cur[lo]) {
		pair(lo, lo)
		lo++
	}
	hiO, hiC := len(old), len(cur)
	for hiO > lo && hiC > lo && same(&old[hiO-1], &cur[hiC-1]) {
		hiO, hiC = hiO-1, hiC-1
		pair(hiO, hiC)
	}
	o, c := old[lo:hiO], cur[lo:hiC]
	if len(o) > maxAlign || len(c) > maxAlign {
		for k := 0; k < len(o) && k < len(c); k++ {
			if similar(&o[k], &c[k]) {
				pair(lo+k, lo+k)
			}
		}
		return out
	}
	// lcs[i][j]: the longest common subsequence of o[i:] and c[j:].
	lcs := make([][]int, len(o)+1)
	for i := range lcs {
		lcs[i] = make([]int, len(c)+1)
	}
	for i := len(o) - 1; i >= 0; i-- {
		for j := len(c) - 1; j >= 0; j-- {
			if same(&o[i], &c[j]) {
				lcs[i][j] = lcs[i+1][j+1] + 1
			} else {
				lcs[i][j] = max(lcs[i+1][j], lcs[i][j+1])
			}
		}
	}
	// Walk the subsequence; between its pairs, pair similar items in order.
	gapO, gapC := []int{}, []int{}
	flush := func() {
		k := 0
		for _, j := range gapC {
			for k < len(gapO) && !similar(&o[gapO[k]], &c[j]) {
				k++
			}
			if k < len(gapO) {
				pair(lo+gapO[k], lo+j)
				k++
			}
		}
		gapO, gapC = gapO[:0], gapC[:0]
	}
	i, j := 0, 0
	for i < len(o) && j < len(c) {
		switch {
		case same(&o[i], &c[j]):
			flush()
			pair(lo+i, lo+j)
			i, j = i+1, j+1
		case lcs[i+1][j] >= lcs[i][j+1]:
			gapO = append(gapO, i)
			i++
		default:
			gapC = append(gapC, j)
			j++
		}
	}
	for ; i < len(o); i++ {
		gapO = append(gapO, i)
	}
	for ; j < len(c); j++ {
		gapC = append(gapC, j)
	}
	flush()
	return out
}

func (m *Model) toggleBaseline() {
	if m.baseline != nil {
		m.baseline = nil
		m.setStatus("baseline cleared", statusInfo)
		return
	}
	m.baseline = &baseline{params: m.nums.res.Totals.Params, macs: m.nums.res.Totals.MACs, memory: m.nums.mem.Total,
		entries: entries(m.stack, &m.nums.res, &m.nums.mem)} // stacks are never edited in place
	m.matchBaseline()
	m.setStatus("baseline marked: changes now show against it (m clears)", statusInfo)
}

// matchBaseline pairs the current items with the baseline's (once per
// change).
func (m *Model) matchBaseline() {
	if m.baseline != nil {
		m.baseline.matched = match(m.baseline.entries, entries(m.stack, &m.nums.res, &m.nums.mem))
	}
}

// baselineDelta writes the change of an item's parameters against the
// baseline, or "new" for an item the baseline did not have.
func (b *baseline) delta(it *item, params int64) string {
	p, ok := b.matched[it.addr.key()]
	if !ok {
		return "new"
	}
	return signed(params-p, engine.FormatCount)
}

// signed writes a change with its sign ("+12.3k", "−4", "±0").
func signed(d int64, format func(int64) string) string {
	switch {
	case d > 0:
		return "+" + format(d)
	case d < 0:
		return "−" + format(-d)
	}
	return "±0"
}
