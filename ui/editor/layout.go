package editor

// Minimum window the editor draws in; smaller windows get a note.
const (
	minWidth  = 60
	minHeight = 18
)

// layout is how the window is split.
type layout struct {
	tooSmall bool
	listH    int // rows of the stack view
	detailH  int // lines of the detail panel
	sideW    int // width of the side column
	listW    int // width of the stack column
	wide     bool
}

// fixed lines: title, column header, two rules, four footer lines, status, help.
const fixedLines = 10

func (m *Model) layout() layout {
	var l layout
	if m.width < minWidth || m.height < minHeight {
		l.tooSmall = true
		return l
	}
	free := m.height - fixedLines
	l.detailH = min(max(free/3, 4), 8)
	l.listH = free - l.detailH
	l.wide = m.width >= 110
	l.sideW = sideWidth(l.wide, m.baseline != nil)
	l.listW = m.width - l.sideW - 1
	return l
}

func (m *Model) listHeight() int { return m.layout().listH }
