package editor

import (
	"context"
	"fmt"
	"runtime"
	"strconv"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/engine/report"
	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/cells"
)

// fitMapView is the map of what fits: the largest batch over widths and
// input sizes, computed in the background when it opens. Moving over it
// previews a cell's figures; enter applies the cell's scaling.
type fitMapView struct {
	keys   keymap.FitMapKeys
	stop   context.CancelFunc // stops the computation; called when the map closes
	fm     *engine.FitMap     // nil until the computation is in
	err    string             // why there is no map
	cursor int
	cells  int // widths and sizes it was asked for
}

// fitMapMsg carries a finished map and the overlay it was made for.
type fitMapMsg struct {
	view *fitMapView
	fm   *engine.FitMap
	err  error
}

// fitMapChosen and fitMapClosed are the map's results.
type (
	fitMapChosen struct{ cell engine.FitCell }
	fitMapClosed struct{}
)

func (v *fitMapView) Update(msg tea.Msg) (tea.Msg, tea.Cmd) {
	k, ok := msg.(tea.KeyMsg)
	if !ok {
		return nil, nil
	}
	if key.Matches(k, v.keys.Close, v.keys.Cancel) {
		return fitMapClosed{}, nil
	}
	if v.fm == nil {
		return nil, nil
	}
	nw, nr := len(v.fm.Widths), len(v.fm.Sizes)
	r, c := v.cursor/nw, v.cursor%nw
	switch {
	case key.Matches(k, v.keys.Up):
		r = max(r-1, 0)
	case key.Matches(k, v.keys.Down):
		r = min(r+1, nr-1)
	case key.Matches(k, v.keys.Left):
		c = max(c-1, 0)
	case key.Matches(k, v.keys.Right):
		c = min(c+1, nw-1)
	case key.Matches(k, v.keys.Accept):
		return fitMapChosen{v.fm.Cells[v.cursor]}, nil
	}
	v.cursor = r*nw + c
	return nil, nil
}

// fitMapSide is how many widths and sizes the editor's map has: 16, or 13
// in a window too narrow for 16 columns (both put ×1 among the widths).
func fitMapSide(width int) int {
	if width >= 80 {
		return 16
	}
	return 13
}

// openFitMap opens the map and starts computing it; it needs a budget and
// a stack with an estimate.
func (m *Model) openFitMap() tea.Cmd {
	t := m.training()
	switch {
	case t.Budget <= 0:
		m.setStatus("the map shows the largest batch that fits a budget: set one first ("+textsafe.Line(m.keys.Settings.Help().Key)+", budget)", statusError)
		return nil
	case !m.nums.mem.Estimated:
		m.setStatus("no map: "+m.nums.mem.Reason(), statusError)
		return nil
	case !m.stack.Input.Spatial():
		m.setStatus("no map: the input "+m.stack.Input.String()+" has no height and width to vary", statusError)
		return nil
	}
	m.clearPreview()
	ctx, stop := context.WithCancel(context.Background())
	v := &fitMapView{keys: m.keys.FitMap(), stop: stop, cells: fitMapSide(m.width)}
	m.open(v)
	s, a := m.stack, m.nums.assume // the stack is never edited in place (see change)
	ax := engine.DefaultFitMapAxes(s, v.cells)
	return func() tea.Msg {
		fm, err := engine.BuildFitMap(ctx, s, t, a, ax, runtime.GOMAXPROCS(0))
		if ctx.Err() != nil {
			return nil
		}
		return fitMapMsg{v, fm, err}
	}
}

// fitMapIn takes a finished map, if it is the open one's.
func (m *Model) fitMapIn(msg fitMapMsg) {
	v, ok := m.overlay.(*fitMapView)
	if !ok || v != msg.view {
		return // a map closed before its computation ended
	}
	v.stop()
	if msg.err != nil {
		v.err = msg.err.Error()
		return
	}
	v.fm = msg.fm
	v.cursor = max(msg.fm.Current, 0)
}

// closeFitMap stops the map's computation and closes it.
func (m *Model) closeFitMap() {
	if v, ok := m.overlay.(*fitMapView); ok {
		v.stop()
	}
	m.closeOverlay()
}

// applyFitCell scales the stack to the chosen cell: one change, one undo.
func (m *Model) applyFitCell(c engine.FitCell) tea.Cmd {
	m.closeFitMap()
	if !c.Estimated {
		m.setStatus("that variant has no estimate ("+textsafe.Line(c.Problem)+"); nothing changed", statusError)
		return nil
	}
	if c.Width == 1 && c.Depth == 1 && c.Input == (engine.Pair{H: m.stack.Input.H, W: m.stack.Input.W}) {
		m.setStatus("that is the stack as it is; nothing changed", statusInfo)
		return nil
	}
	v, err := engine.Scale(m.stack, c.Scaling(0)) // once: change applies it to its copy
	what := fmt.Sprintf("scaled from the map: width ×%s, input %s", factor(c.Width), pairText(c.Input))
	if err == nil {
		what += unitsNote(m.stack, v)
	}
	return m.change(what, func(st *engine.Stack) (addr, error) {
		if err != nil {
			return nil, err
		}
		*st = *v
		return nil, nil
	})
}

func factor(f float64) string { return strconv.FormatFloat(f, 'f', -1, 64) }

func pairText(p engine.Pair) string {
	return strconv.FormatInt(p.H, 10) + "×" + strconv.FormatInt(p.W, 10)
}

// fitMapView draws the map in h lines: a title, the grid (its rows
// scrolled to keep the cursor in view), the cursor cell's figures and
// the legend.
func (fr *frame) fitMapView(v *fitMapView, h int) string {
	switch {
	case v.err != "":
		return cells.Block([]string{"no map: " + textsafe.Line(v.err), fr.keys.Cancel.Help().Key + " returns"}, h, fr.width)
	case v.fm == nil:
		return cells.Block([]string{fmt.Sprintf("estimating %d variants of the stack…", v.cells*v.cells)}, h, fr.width)
	}
	fm := v.fm
	budget := engine.FormatBytes(fm.Budget)
	title := firstFit(fr.width,
		"largest batch that fits "+budget+" per GPU — estimate · rows: input size · columns: width %",
		"largest batch within "+budget+"/GPU (estimate) · rows: input · columns: width %",
		"largest batch within "+budget+"/GPU (estimate)")
	paint := func(r report.FitMapRole, s string) string {
		switch r {
		case report.FitMapAxis:
			return fr.st.Label.Render(s)
		case report.FitMapCursor:
			return fr.st.Cursor.Render(s)
		case report.FitMapNone:
			return fr.st.Dim.Render(s)
		case report.FitMapCurrentC:
			return fr.st.Good.Render(s)
		}
		return s
	}
	grid := report.FitMapGrid(fm, v.cursor, paint)
	vis := max(h-5, 1) // title, header, two preview lines, legend
	nr := len(fm.Sizes)
	off := 0
	if nr > vis {
		off = min(max(v.cursor/len(fm.Widths)-vis/2, 0), nr-vis)
	}
	lines := []string{fr.st.Label.Render(title), grid[0]}
	lines = append(lines, grid[1+off:1+min(off+vis, nr)]...)
	lines = append(lines, fr.fitCellLines(fm, v.cursor)...)
	lines = append(lines, fr.st.Dim.Render(report.FitMapLegend(fm)[0]))
	return cells.Block(lines, h, fr.width)
}

// fitCellLines are the two lines that preview the cursor's cell.
func (fr *frame) fitCellLines(fm *engine.FitMap, i int) []string {
	c := &fm.Cells[i]
	what := fmt.Sprintf("%s width ×%s · input %s", report.FitMapCursorRow, factor(c.Width), pairText(c.Input))
	if i == fm.Current {
		what += " (the stack as it is)"
	}
	if !c.Estimated {
		return []string{what, "  no estimate: " + textsafe.Line(c.Problem)}
	}
	what += fmt.Sprintf(" · params %s · MACs %s", engine.FormatCount(c.Params), engine.FormatCount(c.MACs))
	enter := ""
	if i != fm.Current {
		enter = " · " + fr.keys.Accept.Help().Key + " applies it"
	}
	fits := firstFit(fr.width,
		fmt.Sprintf("  step peak %s at batch %d (estimate) · fits at most batch %s%s", engine.FormatBytes(c.Peak), fm.Axes.Batch, batchText(c.MaxBatch), enter),
		fmt.Sprintf("  peak %s at batch %d · at most batch %s%s", engine.FormatBytes(c.Peak), fm.Axes.Batch, batchText(c.MaxBatch), enter))
	return []string{cells.Fit(what, fr.width), fits}
}
