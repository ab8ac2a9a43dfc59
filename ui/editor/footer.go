package editor

import (
	"fmt"
	"strings"

	"stackfit/engine"
	"stackfit/engine/report"
	"stackfit/engine/textsafe"
	"stackfit/ui/editor/cells"
)

// footer draws totals, the budget gauge and the fit answers; the lines in
// over (at most three) take the place of its last ones. Sizes
// are in the units the reports use (GiB, MiB). With errors in the stack,
// or an invalid field in the open form, memory is not estimated and the
// footer says so instead of giving a verdict.
func (fr *frame) footer(over []string) string {
	res, mem, ft, s := fr.shown()
	t := s.Training
	var dp, dm, dmem string
	if bl := fr.baseline; bl != nil {
		dp = fr.st.Delta.Render(" (" + signed(res.Totals.Params-bl.params, engine.FormatCount) + ")")
		dm = fr.st.Delta.Render(" (" + signed(res.Totals.MACs-bl.macs, engine.FormatCount) + ")")
		dmem = fr.st.Delta.Render(" (" + signed(mem.Total-bl.memory, engine.FormatBytes) + ")")
	}
	sizes := fmt.Sprintf("params %s%s · MACs %s%s", engine.FormatCount(res.Totals.Params), dp, engine.FormatCount(res.Totals.MACs), dm)
	var lines [4]string
	switch {
	case fr.previewBlocked:
		lines[0] = fr.st.Bad.Render("memory not estimated") + " while a field is invalid (✗ in the form)"
	case !mem.Estimated:
		marks := " (✗ marks them)"
		if mem.StackErrors == 0 {
			marks = "" // an empty stack: the reason says the fix
		}
		lines[0] = fr.st.Bad.Render("memory not estimated") + ": " + mem.Reason() + marks + " · resolved rows: " + sizes
	default:
		verdict := ""
		budget, short, bare := " (no budget)", " (no budget)", ""
		if mem.Budget > 0 {
			verdict = fr.st.Good.Render("fits") + " · "
			if !mem.Fits {
				verdict = fr.st.Bad.Render("does not fit") + " · "
			}
			usable := engine.FormatBytes(mem.Budget - mem.Reserve)
			budget = fmt.Sprintf(" of %s usable (%s budget − %s kept free)", usable,
				engine.FormatBytes(mem.Budget), engine.FormatShare(t.HeadroomShare()))
			short = " of " + usable + " usable"
			bare = " / " + usable
		}
		total := engine.FormatBytes(mem.Total)
		memory := []string{
			fmt.Sprintf("%smemory %s%s%s · %s", verdict, total, dmem, budget, sizes),
			fmt.Sprintf("%smemory %s%s%s · %s", verdict, total, dmem, short, sizes),
			fmt.Sprintf("%s%s%s%s · %s", verdict, total, dmem, short, sizes),
			fmt.Sprintf("%s%s%s%s · %s", verdict, total, dmem, bare, sizes),
			tightUnits(fmt.Sprintf("%s%s%s%s · %s", verdict, total, dmem, bare, sizes))}
		if times := timeTexts(fr.shownTime()); times != nil {
			// The time goes beside the memory: the longest forms of both
			// that fit, then the memory without the sizes (shown in the
			// side column and the header) before the time gives way.
			var vs []string
			for _, tt := range times {
				for _, mv := range memory {
					vs = append(vs, mv+" · "+tt)
				}
			}
			vs = append(vs, tightUnits(fmt.Sprintf("%s%s%s%s · %s", verdict, total, dmem, bare, times[len(times)-1])))
			memory = append(vs, memory[len(memory)-1])
		}
		lines[0] = firstFit(fr.width, memory...)
		lines[1] = fr.gauge(mem, fr.width)
		lines[2] = fr.legend(mem)
		lines[3] = fr.fitLine(mem, ft, max(t.Batch, 1))
	}
	copy(lines[len(lines)-len(over):], over) // the first lines of a long status message
	var b strings.Builder
	for _, l := range lines {
		b.WriteString(cells.Fit(l, fr.width))
		b.WriteByte('\n')
	}
	return b.String()
}

// timeTexts gives the time estimate for the memory line, longest first:
// the step, samples per second and the epoch (when the dataset is given);
// "≈" marks each figure as an estimate. nil when there is none.
func timeTexts(tm *engine.Time) []string {
	if tm == nil || !tm.Estimated || tm.Step <= 0 {
		return nil
	}
	step := report.Seconds(tm.Step)
	rate := report.Rate(tm.SamplesPerSecond)
	if tm.Epoch <= 0 {
		return []string{
			fmt.Sprintf("step ≈%s on %s · %s samples/s", step, tm.Device.Key, rate),
			fmt.Sprintf("step ≈%s · %s samples/s", step, rate),
			fmt.Sprintf("step ≈%s", step),
			tightUnits(fmt.Sprintf("≈%s/step", step)),
		}
	}
	epoch := report.Seconds(tm.Epoch)
	return []string{
		fmt.Sprintf("step ≈%s on %s · %s samples/s · epoch ≈%s", step, tm.Device.Key, rate, epoch),
		fmt.Sprintf("step ≈%s · %s samples/s · epoch ≈%s", step, rate, epoch),
		fmt.Sprintf("step ≈%s · epoch ≈%s", step, epoch),
		tightUnits(fmt.Sprintf("≈%s/step · ≈%s/epoch", step, epoch)),
	}
}

// gauge draws the memory categories against the budget (or the total when
// there is none); the reserve kept free shows at the right end.
func (fr *frame) gauge(mem *engine.Memory, w int) string {
	scale := mem.Budget
	if scale <= 0 {
		scale = mem.Total
	}
	if scale <= 0 || w < 4 {
		return ""
	}
	inner := w - 2
	var b strings.Builder
	used := 0
	for i, c := range mem.Categories() {
		n := int(float64(c.Bytes)/float64(scale)*float64(inner) + 0.5)
		if c.Bytes > 0 && n == 0 {
			n = 1
		}
		n = min(n, inner-used)
		if n > 0 {
			b.WriteString(fr.st.Gauge[i].Render(strings.Repeat(fr.st.GaugeGlyph[i], n)))
			used += n
		}
	}
	if mem.Budget > 0 {
		reserve := int(float64(mem.Reserve)/float64(scale)*float64(inner) + 0.5)
		free := inner - used - reserve
		if free > 0 {
			b.WriteString(fr.st.Free.Render(strings.Repeat("·", free)))
			used += free
		}
		if n := inner - used; n > 0 {
			b.WriteString(fr.st.Reserve.Render(strings.Repeat("╌", n)))
		}
	}
	end := "]"
	if mem.Budget > 0 && !mem.Fits {
		end = fr.st.Bad.Render("!")
	}
	return "[" + b.String() + end
}

// legend names the gauge's glyphs with each category's size, as fully as
// the window allows.
func (fr *frame) legend(mem *engine.Memory) string {
	long := [6]string{"weights", "grads", "optim", "act", "work", "cuda"}
	short := [6]string{"w", "g", "opt", "act", "ws", "cuda"}
	var line string
	for _, v := range []struct {
		names [6]string
		gap   string
		tight bool
	}{{long, "  ", false}, {long, " ", true}, {short, " ", true}, {[6]string{}, " ", true}} {
		var parts []string
		for i, c := range mem.Categories() {
			size := engine.FormatBytes(c.Bytes)
			if v.tight {
				size = strings.Replace(size, " ", "", 1)
			}
			name := " " + v.names[i]
			if v.names[i] == "" {
				name = "" // the glyphs alone, as the gauge draws them
			}
			parts = append(parts, fr.st.Gauge[i].Render(fr.st.GaugeGlyph[i])+name+" "+size)
		}
		line = strings.Join(parts, v.gap)
		if cells.Width(line) <= fr.width {
			break
		}
	}
	return line
}

// fitLine gives the fit solver's answers and what limits the batch: what
// each sample adds (kept activations and backward scratch, both growing
// with the batch).
func (fr *frame) fitLine(mem *engine.Memory, ft engine.Fit, batch int64) string {
	if !ft.HasBudget {
		return fr.st.Dim.Render("set a budget (" + textsafe.Line(fr.keys.Settings.Help().Key) + ") to see the largest batch and width that fit")
	}
	var w string
	switch {
	case fr.preview != nil:
		w = "after you accept"
	case fr.widthState == widthSearching:
		w = "searching…"
	case ft.MaxWidth > 0 && !ft.WidthExact:
		w = "over ×32"
	case ft.MaxWidth > 0:
		w = fmt.Sprintf("×%.2f", ft.MaxWidth)
	default:
		w = "none fits"
	}
	gpus := "none up to 65,536"
	if ft.MinGPUs > 0 {
		gpus = fmt.Sprint(ft.MinGPUs)
	}
	limit, short := "limit: "+ft.BatchLimit, ft.BatchLimit
	if ft.MaxBatch > 0 {
		limit = fmt.Sprintf("peak in %s: each sample adds %s kept + %s live", fr.peakWhere(mem), engine.FormatBytes(mem.ActPerSample), engine.FormatBytes(mem.ScratchPerSample))
		short = fmt.Sprintf("+%s a sample, peak %s", engine.FormatBytes(mem.PeakPerSample), fr.peakWhere(mem))
	}
	most := batchText(ft.MaxBatch)
	return firstFit(fr.width,
		fmt.Sprintf("batch %d now · fits at most batch %s (%s) · width %s · fewest GPUs %s", batch, most, limit, w, gpus),
		fmt.Sprintf("batch %d · at most %s (%s) · width %s · GPUs ≥ %s", batch, most, limit, w, gpus),
		fmt.Sprintf("batch %d · at most %s (%s) · width %s · GPUs ≥ %s", batch, most, short, w, gpus),
		fmt.Sprintf("batch %d · at most %s · width %s · GPUs ≥ %s", batch, most, w, gpus))
}

// tightUnits drops the space before byte units ("1.62GiB").
func tightUnits(s string) string {
	for _, u := range []string{" GiB", " MiB", " KiB", " TiB"} {
		s = strings.ReplaceAll(s, u, u[1:])
	}
	return s
}

// firstFit returns the first of the variants (longest first) that fits
// in w cells, or the last one.
func firstFit(w int, variants ...string) string {
	for _, v := range variants {
		if cells.Width(v) <= w {
			return v
		}
	}
	return variants[len(variants)-1]
}

func batchText(n int64) string {
	if n == 0 {
		return "none"
	}
	return engine.GroupDigits(n)
}

// peakWhere says where the shown step peaks.
func (fr *frame) peakWhere(mem *engine.Memory) string {
	res, _, _, _ := fr.shown()
	return mem.PeakWhere(res)
}
