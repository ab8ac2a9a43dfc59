package editor

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
		params, _, _ := itemTotals(&m.items[i], &m.res, &m.mem)
		b.rowParams[m.items[i].addr.key()] = params
	}
	m.baseline = b
	m.setStatus("baseline marked: changes now show against it (m clears)", statusInfo)
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
