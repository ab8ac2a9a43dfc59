package editor

// detailScroll is how far the details panel is scrolled, and for which
// item: moving to another item shows its details from the top.
type detailScroll struct {
	off int
	of  string // the item scrolled: its place in the view and its address
}

// detailKey names the selected item for detailScroll.
func (m *Model) detailKey() string {
	it := m.tree.current()
	if it == nil {
		return ""
	}
	k := it.addr.key()
	if it.gen != nil {
		k += "|" + it.gen.what
	}
	return k
}

// detailOffset is the scroll of the selected item's details.
func (m *Model) detailOffset() int {
	if m.detail.of != m.detailKey() {
		return 0
	}
	return m.detail.off
}

// scrollDetails moves the details panel by delta lines, within its content.
func (m *Model) scrollDetails(delta int) {
	off := m.detailOffset() + delta
	lay := m.layout()
	if lay.tooSmall {
		return
	}
	fr := m.frame()
	m.detail = detailScroll{off: max(min(off, maxDetailOff(len(fr.detailWrapped()), lay.detailH)), 0), of: m.detailKey()}
}

// forgetDetailScroll drops the scroll once another item is selected, so
// coming back shows its details from the top.
func (m *Model) forgetDetailScroll() {
	if m.detail.of != "" && m.detail.of != m.detailKey() {
		m.detail = detailScroll{}
	}
}
