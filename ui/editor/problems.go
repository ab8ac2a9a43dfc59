package editor

import (
	"fmt"

	"stackfit/engine"
)

// problemAt returns the first error or warning shown at visible item i:
// an item's own rows for a layer or a row the engine adds, all of them for
// a folded item or a closed repeat (its rows show nowhere else); nil for
// an unfolded item, whose rows its own lines show.
func (m *Model) problemAt(i int) *engine.Diagnostic {
	it := &m.tree.items[i]
	if it.first < 0 {
		return nil
	}
	switch {
	case it.gen != nil && it.gen.repeat > 0:
		if m.tree.opened[it.gen.key] {
			return nil
		}
	case it.gen == nil && engine.SpecOf(it.layer.Kind).Body:
		if !m.tree.folded[it.addr.key()] {
			return nil
		}
	}
	res := &m.nums.res
	var warn *engine.Diagnostic
	for r := it.first; r <= it.last && r < len(res.Rows); r++ {
		ds := res.DiagsFor(r)
		for k := range ds {
			switch ds[k].Severity {
			case engine.SevError:
				return &ds[k]
			case engine.SevWarning:
				if warn == nil {
					warn = &ds[k]
				}
			}
		}
	}
	return warn
}

// jumpProblem moves the cursor to the next (dir +1) or previous (−1)
// visible item with an error or a warning, wrapping around the stack, and
// says what the problem is.
func (m *Model) jumpProblem(dir int) {
	n := len(m.tree.items)
	total, pos := 0, 0
	target := -1
	for step := 1; step <= n; step++ {
		i := ((m.tree.cursor+dir*step)%n + n) % n
		if m.problemAt(i) != nil && target < 0 {
			target = i
		}
	}
	if target < 0 {
		if ds := m.nums.res.DiagsFor(-1); len(ds) > 0 {
			// the stack's own: the input shape, or a unit no layer uses
			m.setStatus(m.nums.res.Describe(ds[0]), statusInfo)
		} else if m.nums.res.Errors+m.nums.res.Warnings > 0 {
			m.setStatus("the only errors and warnings concern the input shape", statusInfo)
		} else {
			m.setStatus("no errors or warnings", statusInfo)
		}
		return
	}
	for i := 0; i < n; i++ {
		if m.problemAt(i) != nil {
			total++
			if i <= target {
				pos++
			}
		}
	}
	m.tree.cursor = target
	d := m.problemAt(target)
	kind := statusInfo
	if d.Severity == engine.SevError {
		kind = statusError
	}
	m.setStatus(fmt.Sprintf("%d of %d · %s %s: %s", pos, total, d.Severity, m.nums.res.Rows[d.Row].Path, d.Message()), kind)
}
