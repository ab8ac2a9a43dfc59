package cli

import (
	"container/heap"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/report"
	"stackfit/engine/textsafe"
)

// sweepUsage is the sweep command's help (without the training flags).
const sweepUsage = `usage: stackfit sweep FILE [flags]

Evaluates every combination of the widths, depths, resolutions, batches and
precisions given, one row per variant: parameters, MACs per sample, the
estimated step peak per GPU at the batch, the largest batch that fits the
budget, whether the batch fits, and a mark on the variants of the frontier
of compute against memory (no other variant needs at most the MACs and at
most the peak, and less of one). Memory figures are estimates of the
training-memory model (the report's), with its assumptions. With a
device (--gpu NAME), two more columns: the estimated time of one training
step at the row's batch and the samples per second it gives (the report's
roofline estimate: peaks and bandwidth from the datasheet, assumed
efficiencies; an ESTIMATE, not a measurement).

Each flag takes a list (a,b,c) or a range (from:to:step, both ends
included when the steps reach them); a flag left out keeps the stack as
written (×1) or the training setting.

  --width R        width multipliers      e.g. --width 0.5:2:0.25
                                          or --width 0.75,1,1.25
  --depth R        depth multipliers (each block's repeats ceil(N·F))
                                          e.g. --depth 1,1.5,2
  --resolution R   input-size multipliers e.g. --resolution 0.75:1.5:0.25
  --batch R        global batches; a range may multiply: from:to:xK
                                          e.g. --batch 32:1024:x2
                                          or --batch 64,128
  --precision P    precisions, or all     e.g. --precision fp32,bf16-mixed
  --divisor N      round widths to multiples of N (default 8)
  --format F       text (default), csv or json
  --sort COLUMN    sort by width, depth, resolution, batch, precision,
                   params, macs, peak, max-batch or time (the step
                   time; needs --gpu) (ascending; --desc for
                   descending). Sorting holds the rows in memory, so it
                   takes at most 250,000 rows; --top N keeps only the
                   first N and takes any number. Unsorted rows stream in
                   grid order (width, depth, resolution, precision, batch).
  --desc           sort descending
  --top N          with --sort, only the first N rows
  --frontier       only the rows on the frontier
  -o FILE          write to FILE instead of standard output

Two passes: the first finds the frontier (keeping only its points), the
second writes the rows. Each width × depth × resolution variant is
evaluated once per pass (on every core); batches and precisions are
derived from it.

examples:
  stackfit sweep net.yaml --width 0.5:1.5:0.25 --depth 1,2 --budget 24GiB \
    --batch 64
  stackfit sweep net.yaml --resolution 0.75:1.25:0.125 --batch 16:512:x2 \
    --precision all --budget 80GiB --format csv -o sweep.csv
  stackfit sweep net.yaml --width 0.5:2:0.1 --depth 0.5:2:0.1 --budget 24GiB \
    --sort peak --top 20
`

// sweepSortMax is how many rows --sort holds without --top.
const sweepSortMax = 250_000

// maxAxisValues bounds one flag's list or range.
const maxAxisValues = 100_000

// floatAxis reads a list or range of positive numbers.
func floatAxis(name, v string) ([]float64, error) {
	bad := func() error {
		return fmt.Errorf("--%s %q: give numbers above 0 as a list (0.75,1,1.25) or a range from:to:step (0.5:2:0.25)", name, v)
	}
	if parts := strings.Split(v, ":"); len(parts) == 3 {
		var f [3]float64
		for i, p := range parts {
			x, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
			if err != nil || !(x > 0) || math.IsInf(x, 0) {
				return nil, bad()
			}
			f[i] = x
		}
		if f[1] < f[0] {
			return nil, fmt.Errorf("--%s %q: the range ends below its start", name, v)
		}
		n := math.Floor((f[1]-f[0])/f[2]+1e-9) + 1
		if n > maxAxisValues {
			return nil, fmt.Errorf("--%s %q: %g values, more than %d; take a larger step", name, v, n, maxAxisValues)
		}
		out := make([]float64, int(n))
		for i := range out {
			out[i] = math.Round((f[0]+float64(i)*f[2])*1e9) / 1e9 // 0.1·3 is 0.3, not 0.30000000000000004
		}
		return out, nil
	}
	var out []float64
	for _, p := range strings.Split(v, ",") {
		x, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || !(x > 0) || math.IsInf(x, 0) {
			return nil, bad()
		}
		out = append(out, x)
	}
	if len(out) > maxAxisValues {
		return nil, fmt.Errorf("--%s: %d values, more than %d", name, len(out), maxAxisValues)
	}
	return out, nil
}

// batchAxis reads a list or range of batches; a range's step may be xK
// (multiply by K).
func batchAxis(v string) ([]int64, error) {
	bad := fmt.Errorf("--batch %q: give whole numbers from 1 as a list (64,128) or a range from:to:step (32:256:32) or from:to:xK (16:1024:x2)", v)
	num := func(s string) (int64, bool) {
		n, err := strconv.ParseInt(strings.TrimSpace(s), 10, 64)
		return n, err == nil && n >= 1
	}
	if parts := strings.Split(v, ":"); len(parts) == 3 {
		lo, ok1 := num(parts[0])
		hi, ok2 := num(parts[1])
		step := strings.ToLower(strings.TrimSpace(parts[2]))
		times := strings.HasPrefix(step, "x") || strings.HasPrefix(step, "*") || strings.HasPrefix(step, "×")
		k, ok3 := num(strings.TrimLeft(step, "x*×"))
		if !ok1 || !ok2 || !ok3 || (times && k < 2) {
			return nil, bad
		}
		if hi < lo {
			return nil, fmt.Errorf("--batch %q: the range ends below its start", v)
		}
		var out []int64
		for b := lo; b <= hi && len(out) <= maxAxisValues; {
			out = append(out, b)
			if times {
				if b > hi/k {
					break
				}
				b *= k
			} else {
				if b > hi-k {
					break
				}
				b += k
			}
		}
		if len(out) > maxAxisValues {
			return nil, fmt.Errorf("--batch %q: more than %d values; take a larger step", v, maxAxisValues)
		}
		return out, nil
	}
	var out []int64
	for _, p := range strings.Split(v, ",") {
		n, ok := num(p)
		if !ok {
			return nil, bad
		}
		out = append(out, n)
	}
	if len(out) > maxAxisValues {
		return nil, fmt.Errorf("--batch: %d values, more than %d", len(out), maxAxisValues)
	}
	return out, nil
}

// precisionAxis reads a list of precisions, or all.
func precisionAxis(v string) ([]engine.Precision, error) {
	if strings.EqualFold(strings.TrimSpace(v), "all") {
		return engine.Precisions(), nil
	}
	var names []string
	for _, p := range engine.Precisions() {
		names = append(names, p.String())
	}
	var out []engine.Precision
	for _, s := range strings.Split(v, ",") {
		s = strings.ToLower(strings.TrimSpace(s))
		i := slices.Index(names, s)
		if i < 0 {
			return nil, fmt.Errorf("--precision %q: %q is not a precision; give some of %s, or all", v, s, strings.Join(names, ", "))
		}
		if !slices.Contains(out, engine.Precisions()[i]) {
			out = append(out, engine.Precisions()[i])
		}
	}
	return out, nil
}

// sweepColumns are the columns --sort takes, with their order.
var sweepColumns = map[string]func(a, b *engine.SweepRow) int{
	"width":      func(a, b *engine.SweepRow) int { return cmpF(a.Width, b.Width) },
	"depth":      func(a, b *engine.SweepRow) int { return cmpF(a.Depth, b.Depth) },
	"resolution": func(a, b *engine.SweepRow) int { return cmpF(a.Resolution, b.Resolution) },
	"batch":      func(a, b *engine.SweepRow) int { return cmpI(a.Batch, b.Batch) },
	"precision":  func(a, b *engine.SweepRow) int { return cmpI(int64(a.Precision), int64(b.Precision)) },
	"params":     func(a, b *engine.SweepRow) int { return cmpI(a.Params, b.Params) },
	"macs":       func(a, b *engine.SweepRow) int { return cmpI(a.MACs, b.MACs) },
	"peak":       func(a, b *engine.SweepRow) int { return cmpI(peakKey(a), peakKey(b)) },
	"max-batch":  func(a, b *engine.SweepRow) int { return cmpI(a.MaxBatch, b.MaxBatch) },
	"time":       func(a, b *engine.SweepRow) int { return cmpF(timeKey(a), timeKey(b)) },
}

// timeKey sorts variants without a time last.
func timeKey(r *engine.SweepRow) float64 {
	if !r.Estimated || !r.Timed || r.Step <= 0 {
		return math.Inf(1)
	}
	return r.Step
}

// peakKey sorts variants without an estimate last.
func peakKey(r *engine.SweepRow) int64 {
	if !r.Estimated {
		return math.MaxInt64
	}
	return r.Peak
}

func cmpF(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func cmpI(a, b int64) int { return cmpF(float64(a), float64(b)) }

// rowHeap keeps the best N rows by a comparison: a max-heap on it, so
// the worst kept row is on top and leaves first.
type rowHeap struct {
	rows []engine.SweepRow
	less func(a, b *engine.SweepRow) bool
}

func (h *rowHeap) Len() int           { return len(h.rows) }
func (h *rowHeap) Less(i, j int) bool { return h.less(&h.rows[j], &h.rows[i]) }
func (h *rowHeap) Swap(i, j int)      { h.rows[i], h.rows[j] = h.rows[j], h.rows[i] }
func (h *rowHeap) Push(x any)         { h.rows = append(h.rows, x.(engine.SweepRow)) }
func (h *rowHeap) Pop() any {
	r := h.rows[len(h.rows)-1]
	h.rows = h.rows[:len(h.rows)-1]
	return r
}

func runSweep(args []string, std IO) int {
	c := newCommand("sweep", std)
	c.tf.skip = map[string]bool{"batch": true, "precision": true} // lists here, read below
	width := c.fs.String("width", "", "")
	depth := c.fs.String("depth", "", "")
	res := c.fs.String("resolution", "", "")
	divisor := c.fs.Int64("divisor", 0, "")
	format := c.fs.String("format", "text", "")
	sortBy := c.fs.String("sort", "", "")
	desc := c.fs.Bool("desc", false, "")
	top := c.fs.Int("top", 0, "")
	onlyFront := c.fs.Bool("frontier", false, "")
	out := c.fs.String("o", "", "")
	if code, stop := c.parse(args); stop {
		return code
	}
	var g engine.Grid
	var err error
	for _, ax := range []struct {
		name string
		v    string
		dst  *[]float64
	}{{"width", *width, &g.Widths}, {"depth", *depth, &g.Depths}, {"resolution", *res, &g.Resolutions}} {
		if ax.v != "" && err == nil {
			*ax.dst, err = floatAxis(ax.name, ax.v)
		}
	}
	if v := c.fs.Lookup("batch").Value.String(); v != "" && err == nil {
		g.Batches, err = batchAxis(v)
	}
	if v := c.fs.Lookup("precision").Value.String(); v != "" && err == nil {
		g.Precisions, err = precisionAxis(v)
	}
	if err == nil && (*divisor < 0 || *divisor > 1024) {
		err = fmt.Errorf("--divisor %d: give a whole number from 1 to 1024, e.g. 8", *divisor)
	}
	g.Divisor = *divisor
	if err == nil && !slices.Contains([]string{"text", "csv", "json"}, *format) {
		err = fmt.Errorf("--format %q is not known; use text, csv or json", *format)
	}
	var cmp func(a, b *engine.SweepRow) int
	if err == nil && *sortBy != "" {
		var ok bool
		if cmp, ok = sweepColumns[strings.ToLower(*sortBy)]; !ok {
			err = fmt.Errorf("--sort %q: give width, depth, resolution, batch, precision, params, macs, peak, max-batch or time", *sortBy)
		}
	}
	if err == nil && (*top < 0 || (*top > 0 && cmp == nil) || *top > sweepSortMax) {
		err = fmt.Errorf("--top %d: give a number from 1 to %d, with --sort", *top, sweepSortMax)
	}
	if err == nil && *desc && cmp == nil {
		err = fmt.Errorf("--desc sorts descending: give --sort COLUMN too")
	}
	if err != nil {
		return c.fail(err)
	}
	if outputTaken("sweep", *out, std) {
		return ExitUsage
	}
	s, err := load(c.file, std.In)
	if err != nil {
		return c.fail(err)
	}
	t, err := c.tf.apply(s.Training)
	if err != nil {
		return c.fail(err)
	}
	if err := g.Check(); err != nil {
		return c.fail(err)
	}
	t = t.WithDevice() // the device sets the budget when none is given, as in the report
	if _, dev := t.Device(); !dev && strings.EqualFold(*sortBy, "time") {
		return c.fail(fmt.Errorf("--sort time sorts by the estimated step time: give a device too, e.g. --gpu h100-sxm"))
	}
	n, ov := g.Size(t)
	if cmp != nil && *top == 0 && (ov || n > sweepSortMax) {
		return c.fail(fmt.Errorf("--sort holds the rows in memory and takes at most %s; this grid has %s variants: add --top N, or leave --sort out (rows stream in grid order)", engine.GroupDigits(sweepSortMax), engine.GroupDigits(n)))
	}
	less := func(a, b *engine.SweepRow) bool {
		k := cmp(a, b)
		if *desc {
			k = -k
		}
		if k == 0 {
			return a.Index < b.Index
		}
		return k < 0
	}
	err = c.output(*out, func(w io.Writer) error {
		sw := newSweepWriter(w, *format, s, t)
		if err := sw.begin(); err != nil {
			return err
		}
		var held rowHeap
		held.less = less
		st, err := engine.Sweep(context.Background(), s, t, engine.DefaultAssumptions(), g, runtime.NumCPU(), func(r *engine.SweepRow) error {
			if *onlyFront && !r.Frontier {
				return nil
			}
			switch {
			case cmp == nil:
				return sw.row(r)
			case *top > 0:
				if held.Len() < *top {
					heap.Push(&held, *r)
				} else if less(r, &held.rows[0]) {
					held.rows[0] = *r
					heap.Fix(&held, 0)
				}
				return nil
			}
			held.rows = append(held.rows, *r)
			return nil
		})
		if err != nil {
			return err
		}
		if cmp != nil {
			slices.SortFunc(held.rows, func(a, b engine.SweepRow) int {
				if less(&a, &b) {
					return -1
				}
				if less(&b, &a) {
					return 1
				}
				return 0
			})
			for i := range held.rows {
				if err := sw.row(&held.rows[i]); err != nil {
					return err
				}
			}
		}
		return sw.end(st)
	})
	if err != nil {
		return c.fail(err)
	}
	return ExitOK
}

// sweepWriter writes the rows as text, CSV or JSON, one at a time.
type sweepWriter struct {
	w      io.Writer
	format string
	s      *engine.Stack
	t      engine.Training
	n      int64
	buf    []byte
	dev    engine.Device // the device of the time columns, when timed
	timed  bool
}

func newSweepWriter(w io.Writer, format string, s *engine.Stack, t engine.Training) *sweepWriter {
	sw := &sweepWriter{w: w, format: format, s: s, t: t}
	sw.dev, sw.timed = t.Device()
	return sw
}

// assumption states what the memory figures rest on.
func (sw *sweepWriter) assumption() string {
	t := sw.t
	b := "no budget (no largest batch)"
	if t.Budget > 0 {
		b = fmt.Sprintf("budget %s per GPU less %g%% headroom", engine.FormatBytes(t.Budget), t.HeadroomShare()*100)
	}
	note := fmt.Sprintf("memory is an estimate: %s optimizer, %d GPU(s), %s, %s", t.Optimizer, max(t.GPUs, 1), "sharding "+t.Shard.String(), b)
	if sw.timed {
		note += fmt.Sprintf("; step time is an estimate on %s (roofline model)", sw.dev.Key)
	}
	return note
}

const sweepTextHead = "%-7s %-7s %-9s %-8s %-11s %14s %17s %11s %10s %-4s %s\n"

// sweepTimeHead follows the text columns when a device is given: the
// frontier mark, then the step time and samples per second.
const sweepTimeHead = " %-1s %11s %11s\n"

func (sw *sweepWriter) begin() error {
	switch sw.format {
	case "csv":
		head := "width,depth,resolution,input,batch,precision,params,macs,peak_bytes,max_batch,fits,frontier,"
		if sw.timed {
			head += "step_seconds,samples_per_second,"
		}
		_, err := io.WriteString(sw.w, head+"problem\n")
		return err
	case "json":
		name, _ := json.Marshal(sw.s.Name)
		note, _ := json.Marshal(sw.assumption())
		_, err := fmt.Fprintf(sw.w, "{\"stack\":%s,\"budget_bytes\":%d,\"estimate\":%s,\"rows\":[", name, sw.t.Budget, note)
		return err
	}
	if _, err := fmt.Fprintf(sw.w, "sweep of %s — %s\n* on the frontier: no other variant needs at most its MACs and at most its peak, and less of one\n\n", textsafe.Line(sw.s.Name), sw.assumption()); err != nil {
		return err
	}
	head := fmt.Sprintf(sweepTextHead, "width", "depth", "input", "batch", "precision", "params", "MACs/sample", "peak (est)", "max batch", "fits", "")
	if sw.timed {
		head = strings.TrimSuffix(head, "\n") + fmt.Sprintf(sweepTimeHead, "", "step (est)", "samples/s")
	}
	_, err := io.WriteString(sw.w, head)
	return err
}

func (sw *sweepWriter) row(r *engine.SweepRow) error {
	sw.n++
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	in := fmt.Sprintf("%dx%d", r.Input.H, r.Input.W)
	b := sw.buf[:0]
	switch sw.format {
	case "csv":
		b = fmt.Appendf(b, "%s,%s,%s,%s,%d,%s,", f(r.Width), f(r.Depth), f(r.Resolution), in, r.Batch, r.Precision)
		if r.Estimated {
			b = fmt.Appendf(b, "%d,%d,%d,%s,%t,%t,", r.Params, r.MACs, r.Peak, sw.maxBatch(r, ""), r.Fits, r.Frontier)
			if sw.timed {
				b = fmt.Appendf(b, "%s,%s,", f(r.Step), f(r.SamplesPerSecond))
			}
			b = append(b, '\n')
		} else {
			b = append(b, ",,,,,,"...)
			if sw.timed {
				b = append(b, ",,"...)
			}
			b = fmt.Appendf(b, "%s\n", csvField(r.Problem))
		}
	case "json":
		if sw.n > 1 {
			b = append(b, ',')
		}
		b = fmt.Appendf(b, "\n{\"width\":%s,\"depth\":%s,\"resolution\":%s,\"input\":[%d,%d],\"batch\":%d,\"precision\":%q,",
			f(r.Width), f(r.Depth), f(r.Resolution), r.Input.H, r.Input.W, r.Batch, r.Precision.String())
		if r.Estimated {
			b = fmt.Appendf(b, "\"params\":%d,\"macs\":%d,\"peak_bytes\":%d,\"max_batch\":%s,\"fits\":%t,\"frontier\":%t", r.Params, r.MACs, r.Peak, sw.maxBatch(r, "null"), r.Fits, r.Frontier)
			if sw.timed {
				b = fmt.Appendf(b, ",\"step_seconds\":%s,\"samples_per_second\":%s", f(r.Step), f(r.SamplesPerSecond))
			}
			b = append(b, '}')
		} else {
			p, _ := json.Marshal(r.Problem)
			b = fmt.Appendf(b, "\"problem\":%s}", p)
		}
	default:
		if !r.Estimated {
			b = fmt.Appendf(b, "%-7s %-7s %-9s %-8d %-11s  no estimate: %s\n", f(r.Width), f(r.Depth), in, r.Batch, r.Precision, textsafe.Line(r.Problem))
			break
		}
		mb, fits, mark := "-", "yes", ""
		if sw.t.Budget > 0 {
			mb = engine.GroupDigits(r.MaxBatch)
		}
		if !r.Fits {
			fits = "no"
		}
		if r.Frontier {
			mark = "*"
		}
		b = fmt.Appendf(b, sweepTextHead, f(r.Width), f(r.Depth), in, strconv.FormatInt(r.Batch, 10), r.Precision,
			engine.GroupDigits(r.Params), engine.GroupDigits(r.MACs), engine.FormatBytes(r.Peak), mb, fits, mark)
		if sw.timed {
			b = append(b[:len(b)-1-len(mark)], fmt.Sprintf(sweepTimeHead, mark, report.Seconds(r.Step), report.Rate(r.SamplesPerSecond))...)
		}
	}
	sw.buf = b
	_, err := sw.w.Write(b)
	return err
}

func (sw *sweepWriter) end(st engine.SweepStats) error {
	switch sw.format {
	case "csv":
		return nil
	case "json":
		_, err := fmt.Fprintf(sw.w, "\n],\"variants\":%d,\"frontier_points\":%d}\n", st.Variants, st.Frontier)
		return err
	}
	_, err := fmt.Fprintf(sw.w, "\n%s variants (%s written), %s evaluations; %d point(s) on the frontier\n",
		engine.GroupDigits(st.Variants), engine.GroupDigits(sw.n), engine.GroupDigits(st.Evaluations), st.Frontier)
	return err
}

// maxBatch is a row's largest batch, or none (no budget, no answer).
func (sw *sweepWriter) maxBatch(r *engine.SweepRow, none string) string {
	if sw.t.Budget <= 0 {
		return none
	}
	return strconv.FormatInt(r.MaxBatch, 10)
}

// csvField quotes a CSV field when it needs it.
func csvField(s string) string {
	if strings.ContainsAny(s, ",\"\n\r") {
		return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
	}
	return s
}

// outputTaken reports, and says on standard error, that the file -o
// names already exists: a command that writes a new file never writes
// over one it has not read.
func outputTaken(cmd, out string, std IO) bool {
	if out == "" {
		return false
	}
	if _, err := os.Lstat(out); err != nil {
		return false
	}
	fmt.Fprintf(std.Err, "stackfit %s: -o %s exists; stackfit does not overwrite a file it has not read — choose another name\n", cmd, textsafe.Line(out))
	return true
}
