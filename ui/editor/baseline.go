package editor

import "stackfit/engine"

// baseline is a marked earlier state the view compares against.
type baseline struct {
	params, macs, memory int64
	rowParams            map[string]int64 // item address → parameters
}

func (m *Model) toggleBaseline() {
	if m.baseline != nil {
		m.baseline = nil
		m.setStatus("baseline cleared", statusInfo)
		return
	}
	b := &baseline{params: m.res.Totals.Params, macs: m.res.Totals.MACs, memory: m.mem.Total, rowParams: map[string]int64{}}
	for i := range m.items {
		b.rowParams[m.items[i].addr.key()] = m.itemParams(&m.items[i])
	}
	m.baseline = b
	m.setStatus("baseline marked: changes now show against it (m clears)", statusInfo)
}

// itemParams sums the parameters of an item's rows.
func (m *Model) itemParams(it *item) int64 {
	if it.first < 0 {
		return 0
	}
	var p int64
	for i := it.first; i <= it.last; i++ {
		if m.res.Rows[i].Status == engine.StatusOK {
			p += m.res.Rows[i].Params
		}
	}
	return p
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
