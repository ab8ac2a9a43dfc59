package editor

import (
	"fmt"
	"math"
	"stackfit/ui/editor/cells"
	"strings"

	"stackfit/engine"
)

// chartView plots, along the depth of the stack, each row's activation
// volume (C·H·W) and parameter count on log scales, with the rows where the
// resolution drops marked: the shape of a network at a glance.
func (fr *frame) chartView(h int) string {
	rows := fr.res.Rows
	w := fr.width - 8
	if len(rows) == 0 || w < 10 {
		return cells.Block([]string{"nothing to chart: the stack is empty"}, h, fr.width)
	}
	// Short stacks get up to three columns a row; long ones share columns,
	// each showing the largest value of its rows.
	per := max(min(w/len(rows), 3), 1)
	cols := min(w, len(rows)*per)
	vol := make([]float64, cols)
	par := make([]float64, cols)
	stage := make([]bool, cols)
	prevH := fr.res.Input.H
	for i := range rows {
		r := &rows[i]
		if r.Status != engine.StatusOK {
			continue
		}
		v, _ := r.Out.Elements()
		drop := r.Out.H < prevH && r.Role == engine.RoleLayer
		prevH = r.Out.H
		c0, c1 := i*cols/len(rows), max((i+1)*cols/len(rows), i*cols/len(rows)+1)
		for c := c0; c < c1 && c < cols; c++ {
			vol[c] = math.Max(vol[c], float64(v))
			par[c] = math.Max(par[c], float64(r.Params))
		}
		if drop {
			stage[c0] = true
		}
	}
	plotH := max((h-5)/2, 2)
	var lines []string
	lines = append(lines, fr.st.Label.Render("activation volume per layer (C·H·W, log scale)"))
	lines = append(lines, fr.bars(vol, plotH, fr.st.Gauge[3].Render)...)
	lines = append(lines, fr.axis(stage))
	lines = append(lines, fr.st.Label.Render("parameters per layer (log scale)"))
	lines = append(lines, fr.bars(par, plotH, fr.st.Gauge[0].Render)...)
	lines = append(lines, fr.st.Dim.Render(fmt.Sprintf("%d rows over %d columns · ┃ marks where the resolution drops · p or esc returns", len(rows), cols)))
	return cells.Block(lines, h, fr.width)
}

// bars draws values as vertical bars h cells tall, on a log scale.
func (fr *frame) bars(vals []float64, h int, paint func(...string) string) []string {
	top, bottom := 0.0, math.Inf(1)
	for _, v := range vals {
		top = math.Max(top, v)
		if v > 0 {
			bottom = math.Min(bottom, v)
		}
	}
	// Log scale from a tenth of the smallest value to the largest, so the
	// smallest non-zero value still shows and the shape fills the height.
	scaled := make([]float64, len(vals)) // 0..h·8 eighths
	lo, hi := math.Log10(bottom/10), math.Log10(top)
	for i, v := range vals {
		if v > 0 && hi > lo {
			scaled[i] = (math.Log10(v) - lo) / (hi - lo) * float64(h*8)
		}
	}
	glyph := []string{" ", "▁", "▂", "▃", "▄", "▅", "▆", "▇", "█"}
	out := make([]string, h)
	for y := 0; y < h; y++ {
		level := float64((h - 1 - y) * 8) // eighths below this line
		var b strings.Builder
		for _, s := range scaled {
			e := int(math.Round(s - level))
			b.WriteString(glyph[max(min(e, 8), 0)])
		}
		label := "      "
		switch {
		case y == 0:
			label = fmt.Sprintf("%6s", engine.FormatCount(int64(top)))
		case y == h-1 && bottom < top:
			label = fmt.Sprintf("%6s", engine.FormatCount(int64(bottom)))
		}
		out[y] = fr.st.Dim.Render(label) + " " + paint(b.String())
	}
	return out
}

func (fr *frame) axis(stage []bool) string {
	var b strings.Builder
	for _, s := range stage {
		if s {
			b.WriteString("┃")
		} else {
			b.WriteString("─")
		}
	}
	return fr.st.Dim.Render("       " + b.String())
}
