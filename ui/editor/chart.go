package editor

import (
	"fmt"
	"math"
	"strings"

	"stackfit/engine"
)

// chartView plots, along the depth of the stack, each row's activation
// volume (C·H·W) and parameter count on log scales, with the rows where the
// resolution drops marked: the shape of a network at a glance.
func (m *Model) chartView(h int) string {
	rows := m.res.Rows
	w := m.width - 8
	if len(rows) == 0 || w < 10 {
		return pad([]string{"nothing to chart: the stack is empty"}, h, m.width)
	}
	cols := min(w, len(rows))
	// Each column takes the largest value of the rows that fall in it.
	vol := make([]float64, cols)
	par := make([]float64, cols)
	stage := make([]bool, cols)
	prevH := m.res.Input.H
	for i := range rows {
		c := i * cols / len(rows)
		r := &rows[i]
		if r.Status != engine.StatusOK {
			continue
		}
		v, _ := r.Out.Elements()
		vol[c] = math.Max(vol[c], float64(v))
		par[c] = math.Max(par[c], float64(r.Params))
		if r.Out.H < prevH && r.Role == engine.RoleLayer {
			stage[c] = true
		}
		prevH = r.Out.H
	}
	plotH := max((h-5)/2, 2)
	var lines []string
	lines = append(lines, m.st.Label.Render("activation volume per layer (C·H·W, log scale)"))
	lines = append(lines, m.bars(vol, plotH, m.st.Gauge[3].Render)...)
	lines = append(lines, m.axis(stage))
	lines = append(lines, m.st.Label.Render("parameters per layer (log scale)"))
	lines = append(lines, m.bars(par, plotH, m.st.Gauge[0].Render)...)
	lines = append(lines, m.st.Dim.Render(fmt.Sprintf("%d rows over %d columns · ┃ marks where the resolution drops · p or esc returns", len(rows), cols)))
	return pad(lines, h, m.width)
}

// bars draws values as vertical bars h cells tall, on a log scale.
func (m *Model) bars(vals []float64, h int, paint func(...string) string) []string {
	top := 0.0
	for _, v := range vals {
		top = math.Max(top, v)
	}
	scaled := make([]float64, len(vals)) // 0..h·8 eighths
	if top > 1 {
		for i, v := range vals {
			if v >= 1 {
				scaled[i] = math.Log10(v+1) / math.Log10(top+1) * float64(h*8)
			}
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
		if y == 0 {
			label = fmt.Sprintf("%6s", engine.FormatCount(int64(top)))
		}
		out[y] = m.st.Dim.Render(label) + " " + paint(b.String())
	}
	return out
}

func (m *Model) axis(stage []bool) string {
	var b strings.Builder
	for _, s := range stage {
		if s {
			b.WriteString("┃")
		} else {
			b.WriteString("─")
		}
	}
	return m.st.Dim.Render("       " + b.String())
}
