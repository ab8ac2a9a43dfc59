package report

import (
	"context"
	"fmt"
	"io"
	"runtime"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// FitMapCell is how wide each cell of a fit map is drawn: a mark and up to
// three characters of batch (engine.FitMapBatch), so 16 widths and an
// input column fit 80 columns.
const FitMapCell = 4

// Marks of the fit map; they carry its meaning without colour.
const (
	FitMapCurrentMark = "*" // the stack as it stands
	FitMapCursorRow   = "▸" // the selected row (editor)
	FitMapCursorCol   = "▾" // the selected column (editor)
	FitMapNoEstimate  = "?" // the variant has no estimate
)

// FitMapRole says what a piece of the drawn map is, for a caller that
// styles it (the editor); the marks already say it without styles.
type FitMapRole uint8

// Roles.
const (
	FitMapPlain    FitMapRole = iota
	FitMapAxis                // the axis labels
	FitMapCursor              // the selected cell
	FitMapNone                // a cell where nothing fits, or no estimate
	FitMapCurrentC            // the stack's own cell
)

// FitMapGrid draws fm as lines: a header of widths (% of the stack's) and
// a line per input size, each cell the largest batch that fits. cursor is
// the selected cell's index (−1: none); paint, when not nil, styles each
// piece (it must not change its width).
func FitMapGrid(fm *engine.FitMap, cursor int, paint func(FitMapRole, string) string) []string {
	if paint == nil {
		paint = func(_ FitMapRole, s string) string { return s }
	}
	nw := len(fm.Widths)
	labels := make([]string, len(fm.Sizes))
	gut := len("input")
	for i, p := range fm.Sizes {
		labels[i] = strconv.FormatInt(p.H, 10)
		if p.H != p.W {
			labels[i] += "×" + strconv.FormatInt(p.W, 10)
		}
		gut = max(gut, runes(labels[i]))
	}
	gut += 2 // a mark before, a space after
	cr, cc := -1, -1
	if cursor >= 0 && cursor < len(fm.Cells) {
		cr, cc = cursor/nw, cursor%nw
	}
	var b strings.Builder
	b.WriteString(paint(FitMapAxis, pad("input", gut, false)))
	for c, w := range fm.Widths {
		mark := " "
		if c == cc {
			mark = FitMapCursorCol
		}
		b.WriteString(paint(FitMapAxis, pad(mark+strconv.FormatFloat(w*100, 'f', 0, 64), FitMapCell, true)))
	}
	lines := []string{strings.TrimRight(b.String(), " ")}
	for r := range fm.Sizes {
		b.Reset()
		mark := " "
		if r == cr {
			mark = FitMapCursorRow
		}
		b.WriteString(paint(FitMapAxis, pad(mark+labels[r], gut, false)))
		for c := range nw {
			i := r*nw + c
			cell := &fm.Cells[i]
			text, role := engine.FitMapBatch(cell.MaxBatch), FitMapPlain
			if !cell.Estimated {
				text = FitMapNoEstimate
			}
			if !cell.Estimated || cell.MaxBatch == 0 {
				role = FitMapNone
			}
			if i == fm.Current {
				text, role = FitMapCurrentMark+text, FitMapCurrentC
			}
			if i == cursor {
				role = FitMapCursor
			}
			s := pad(text, FitMapCell, true)
			if role == FitMapCursor {
				// Only the number is styled, so the cell keeps its gap.
				n := FitMapCell - runes(text)
				b.WriteString(s[:n] + paint(role, text))
				continue
			}
			b.WriteString(paint(role, s))
		}
		lines = append(lines, b.String())
	}
	return lines
}

// FitMapLegend says what the map's marks and figures mean, in two lines
// that fit 80 columns.
func FitMapLegend(fm *engine.FitMap) []string {
	cur := ""
	if fm.Current >= 0 {
		cur = FitMapCurrentMark + " the stack as it is · "
	}
	return []string{cur + "- not even batch 1 fits · " + FitMapNoEstimate + " no estimate (errors)",
		"k, M: thousands, millions, rounded down"}
}

// writeFitMap writes the fit map section of the text report.
func writeFitMap(w io.Writer, fm *engine.FitMap) {
	fmt.Fprintf(w, "\nlargest batch that fits %s per GPU — estimate\n", engine.FormatBytes(fm.Budget))
	fmt.Fprintf(w, "  rows: input size · columns: width, %% of the stack's · depth ×%s\n", strconv.FormatFloat(fm.Axes.Depth, 'g', -1, 64))
	for _, l := range FitMapGrid(fm, -1, nil) {
		fmt.Fprintf(w, "  %s\n", l)
	}
	for _, l := range FitMapLegend(fm) {
		fmt.Fprintf(w, "  %s\n", l)
	}
}

func runes(s string) int { return len([]rune(s)) }

// pad pads s with spaces to n runes, on the left when right is set.
func pad(s string, n int, right bool) string {
	p := strings.Repeat(" ", max(n-runes(s), 0))
	if right {
		return p + s
	}
	return s + p
}

// TextFitMapSide is how many widths and input sizes the text report's
// fit map has; TextFitMapRows the most rows a stack may have for the
// report to draw it (each cell evaluates the scaled stack).
const (
	TextFitMapSide = 7
	TextFitMapRows = 100_000
)

// textFitMap writes the text report's fit map: 7 widths from ×0.5 to ×2
// by 7 input sizes around the stack's, at its depth and batch.
func textFitMap(w io.Writer, an *engine.Analysis) {
	if n := len(an.Result.Rows); n > TextFitMapRows {
		fmt.Fprintf(w, "\nno map of widths and input sizes: the stack has %s rows (it is drawn up to %s)\n", engine.GroupDigits(int64(n)), engine.GroupDigits(TextFitMapRows))
		return
	}
	fm, err := engine.BuildFitMap(context.Background(), an.Stack, an.Training, an.Assumptions,
		engine.DefaultFitMapAxes(an.Stack, TextFitMapSide), runtime.GOMAXPROCS(0))
	if err != nil {
		fmt.Fprintf(w, "\nno map of widths and input sizes: %s\n", textsafe.Line(err.Error()))
		return
	}
	writeFitMap(w, fm)
}
