package editor

// Minimum window the editor draws in; smaller windows get a note.
const (
	minWidth  = 60
	minHeight = 18
)

// minLabel is the fewest cells a layer's text keeps before side columns
// give way (the share bar first, then the running activation total).
const minLabel = 26

// layout is how the window is split.
type layout struct {
	tooSmall bool
	listH    int // rows of the stack view
	detailH  int // lines of the detail panel
	sideW    int // width of the side column
	listW    int // width of the stack column
	cols     sideCols
}

// sideCols says which side columns show.
type sideCols struct {
	wide  bool // MACs and receptive field
	act   bool // running activation total
	bar   bool // share bar
	delta bool // change against the baseline
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
	l.cols = sideCols{wide: m.width >= 110, act: true, bar: true, delta: m.baseline != nil}
	for _, drop := range []*bool{&l.cols.bar, &l.cols.act} {
		if m.width-sideWidth(l.cols)-1 >= minLabel {
			break
		}
		*drop = false
	}
	l.sideW = sideWidth(l.cols)
	l.listW = m.width - l.sideW - 1
	return l
}

func (m *Model) listHeight() int { return m.layout().listH }
