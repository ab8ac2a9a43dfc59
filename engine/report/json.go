// Package report turns an evaluated stack into the printouts stackfit
// offers: JSON for scripts and a plain-text table for terminals.
package report

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"unicode/utf8"

	"stackfit/engine"
)

// JSON is the document `stackfit report --format json` prints. Field names
// are a public schema: later versions add fields and never rename these.
type JSON struct {
	Name     string      `json:"name"`
	Input    [3]int64    `json:"input"`
	Layers   []JSONLayer `json:"layers"`
	Totals   JSONTotals  `json:"totals"`
	Errors   []string    `json:"errors"`   // problems with the input itself
	Warnings []string    `json:"warnings"` // reserved for stack-wide notes
	Memory   *JSONMemory `json:"memory"`   // training memory per GPU (an estimate)
	Fit      *JSONFit    `json:"fit"`      // null without a budget, and when the memory is not estimated
	Time     *JSONTime   `json:"time"`     // training time (an estimate); null without a device (--gpu)
}

// JSONMemory is the training-memory estimate for one GPU, in bytes.
type JSONMemory struct {
	Estimate    bool           `json:"estimate"`  // always true: see the assumptions
	Estimated   bool           `json:"estimated"` // false when the stack has errors (the figures are partial) or no layers: fits is false, fit null and reason says why
	Reason      string         `json:"reason"`    // why the memory is not estimated ("the stack has 2 error(s)"); "" when it is
	Setup       JSONSetup      `json:"setup"`
	Weights     int64          `json:"weights"`
	Gradients   int64          `json:"gradients"`
	Optimizer   int64          `json:"optimizer"`
	Activations int64          `json:"activations"`
	Workspace   int64          `json:"workspace"`
	Overhead    int64          `json:"overhead"`
	Total       int64          `json:"total"`
	Budget      int64          `json:"budget"`  // 0: none
	Reserve     int64          `json:"reserve"` // the headroom kept free
	Fits        bool           `json:"fits"`
	Inference   int64          `json:"inference"`
	Assumptions JSONAssumption `json:"assumptions"`
	Peak        JSONPeak       `json:"peak"` // where one training step's activation memory peaks
}

// JSONPeak is the step simulation's answer: the activation memory per
// sample at the step's peak, what part of it is kept for backward, and
// where the peak falls.
type JSONPeak struct {
	PerSample int64  `json:"per_sample"` // bytes per sample at the peak
	Kept      int64  `json:"kept"`       // of them, kept for backward (act bytes summed)
	Phase     string `json:"phase"`      // forward or backward ("" when not estimated)
	At        string `json:"at"`         // the row's path ("" when not simulated)
}

// JSONSetup is the training setup the estimate is for.
type JSONSetup struct {
	Batch      int64  `json:"batch"`
	MicroBatch int64  `json:"micro_batch"`
	GPUs       int64  `json:"gpus"`
	Precision  string `json:"precision"`
	Optimizer  string `json:"optimizer"`
	Shard      string `json:"shard"`
	Accumulate int64  `json:"accumulate"`
	Checkpoint int64  `json:"checkpoint"`
}

// JSONAssumption states what the estimate assumes.
type JSONAssumption struct {
	ActivationBytes int64   `json:"activation_bytes"`
	MaskBytes       int64   `json:"mask_bytes"`
	IndexBytes      int64   `json:"index_bytes"`
	Headroom        float64 `json:"headroom"`
	Note            string  `json:"note"`
}

// JSONFit holds the fit solver's answers, each with the category that
// limits it.
type JSONFit struct {
	MaxBatch JSONAnswer `json:"max_batch"`
	MaxWidth JSONAnswer `json:"max_width"`
	MinGPUs  JSONAnswer `json:"min_gpus"`
}

// JSONAnswer is one answer: 0 means nothing fits.
type JSONAnswer struct {
	Value float64 `json:"value"`
	Limit string  `json:"limit"`
	Peak  string  `json:"peak"` // where the step's memory peaks, for the batch answer ("backward at 6.1.1"); "" for the others
}

// Caution is the sentence every memory figure comes with.
const Caution = "Estimates: frameworks, convolution workspaces, allocator fragmentation and the CUDA runtime differ; keep headroom."

// JSONLayer is one row of the flattened stack.
type JSONLayer struct {
	Path     string         `json:"path"`
	Kind     string         `json:"kind"`
	Name     string         `json:"name"`
	Role     string         `json:"role"`   // layer, shortcut, residual-add or after-add
	Status   string         `json:"status"` // ok, error or unresolved
	Out      *[3]int64      `json:"out"`    // null unless status is ok
	Params   int64          `json:"params"`
	Buffers  int64          `json:"buffers"`
	MACs     int64          `json:"macs"`
	ActBytes int64          `json:"act_bytes"` // activation bytes this layer keeps for backward, at the micro-batch
	RF       [2]float64     `json:"rf"`
	Jump     [2]float64     `json:"jump"`
	Errors   []string       `json:"errors"`
	Warnings []string       `json:"warnings"`
	Notes    []string       `json:"notes"` // facts such as how much a merge crops
	Time     *JSONLayerTime `json:"time"`  // this layer's time estimate per micro-batch; null without a device
}

// JSONTotals sums the resolved rows.
type JSONTotals struct {
	Params  int64 `json:"params"`
	Buffers int64 `json:"buffers"`
	MACs    int64 `json:"macs"`
}

// BuildJSON converts an analysis into the JSON document, for programs that
// want the values rather than the bytes. WriteJSON writes the same
// document a layer at a time, without holding every layer at once.
func BuildJSON(an *engine.Analysis) *JSON {
	doc := buildHead(an)
	doc.Layers = make([]JSONLayer, len(an.Result.Rows))
	outs := make([][3]int64, len(an.Result.Rows))
	for i := range an.Result.Rows {
		doc.Layers[i] = buildLayer(an, i, &outs[i])
	}
	return doc
}

// buildLayer converts row i of an analysis into its JSON form; the output
// shape, when known, goes into out.
func buildLayer(an *engine.Analysis, i int, out *[3]int64) JSONLayer {
	r, m := an.Result, &an.Memory
	row := &r.Rows[i]
	jl := JSONLayer{
		Path:     row.Path.String(),
		Kind:     row.Layer.Kind.String(),
		Name:     row.Layer.Name,
		Role:     row.Role.String(),
		Status:   row.Status.String(),
		Params:   row.Params,
		Buffers:  row.Buffers,
		MACs:     row.MACs,
		RF:       [2]float64{row.RF.H, row.RF.W},
		Jump:     [2]float64{row.Jump.H, row.Jump.W},
		Errors:   []string{},
		Warnings: []string{},
		Notes:    []string{},
	}
	if row.Status == engine.StatusOK {
		*out = [3]int64{row.Out.C, row.Out.H, row.Out.W}
		jl.Out = out
	}
	if i < len(m.Rows) {
		jl.ActBytes = m.Rows[i]
	}
	jl.Time = buildLayerTime(an, i)
	for _, d := range r.DiagsFor(i) {
		switch d.Severity {
		case engine.SevError:
			jl.Errors = append(jl.Errors, d.Message())
		case engine.SevWarning:
			jl.Warnings = append(jl.Warnings, d.Message())
		default:
			jl.Notes = append(jl.Notes, d.Message())
		}
	}
	return jl
}

// buildHead converts everything but the layers.
func buildHead(an *engine.Analysis) *JSON {
	s, r, m := an.Stack, an.Result, &an.Memory
	doc := &JSON{
		Name:     s.Name,
		Input:    [3]int64{s.Input.C, s.Input.H, s.Input.W},
		Layers:   []JSONLayer{},
		Totals:   JSONTotals{r.Totals.Params, r.Totals.Buffers, r.Totals.MACs},
		Errors:   []string{},
		Warnings: []string{},
	}
	for _, d := range r.DiagsFor(-1) {
		doc.Errors = append(doc.Errors, d.Message())
	}
	t := an.Training
	doc.Memory = &JSONMemory{
		Estimate: true, Estimated: m.Estimated, Reason: m.Reason(),
		Setup: JSONSetup{Batch: max(t.Batch, 1), MicroBatch: m.MicroBatch, GPUs: max(t.GPUs, 1),
			Precision: t.Precision.String(), Optimizer: t.Optimizer.String(), Shard: t.Shard.String(),
			Accumulate: max(t.Accumulate, 1), Checkpoint: t.Checkpoint},
		Weights: m.Weights, Gradients: m.Gradients, Optimizer: m.Optimizer, Activations: m.Activations,
		Workspace: m.Workspace, Overhead: m.Overhead, Total: m.Total, Budget: m.Budget, Reserve: m.Reserve,
		Fits: m.Fits, Inference: m.Inference,
		Assumptions: JSONAssumption{ActivationBytes: engine.ActivationBytes(t.Precision), MaskBytes: an.Assumptions.MaskBytes,
			IndexBytes: an.Assumptions.IndexBytes, Headroom: t.HeadroomShare(), Note: Caution},
	}
	if m.Estimated {
		doc.Memory.Peak = JSONPeak{PerSample: m.PeakPerSample, Kept: m.ActPerSample, Phase: m.PeakPhase.String()}
		if m.PeakRow >= 0 && m.PeakRow < len(r.Rows) {
			doc.Memory.Peak.At = r.Rows[m.PeakRow].Path.String()
		}
	}
	if an.Fit.HasBudget {
		doc.Fit = &JSONFit{
			MaxBatch: JSONAnswer{float64(an.Fit.MaxBatch), an.Fit.BatchLimit, m.PeakWhere(r)},
			MaxWidth: JSONAnswer{an.Fit.MaxWidth, an.Fit.WidthLimit, ""},
			MinGPUs:  JSONAnswer{float64(an.Fit.MinGPUs), an.Fit.GPUsLimit, ""},
		}
	}
	doc.Time = buildTime(an)
	return doc
}

// WriteJSON writes the JSON report with one top-level field, and one
// layer, per line: readable, diffable, and several times faster to write
// than fully indented JSON. Besides what encoding/json escapes, the C1
// controls and the bidirectional controls are written as \uXXXX escapes
// (escapeInvisible), so a report shown on a terminal or in a review
// neither acts on them nor reorders around them; it decodes to the same
// strings.
func WriteJSON(w io.Writer, an *engine.Analysis) error {
	doc := buildHead(an)
	b := bufio.NewWriterSize(w, 64<<10)
	field := func(name string, v any, last bool) error {
		data, err := json.Marshal(v)
		if err != nil {
			return err
		}
		fmt.Fprintf(b, "  %q: %s", name, escapeInvisible(data))
		if !last {
			b.WriteByte(',')
		}
		b.WriteByte('\n')
		return nil
	}
	b.WriteString("{\n")
	if err := field("name", doc.Name, false); err != nil {
		return err
	}
	field("input", doc.Input, false)
	b.WriteString("  \"layers\": [")
	var line bytes.Buffer // one layer, encoded, before its newline is cut
	enc := json.NewEncoder(&line)
	var jl JSONLayer // one value and one shape for every line
	var out [3]int64
	for i := range an.Result.Rows {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString("\n    ")
		jl = buildLayer(an, i, &out)
		line.Reset()
		if err := enc.Encode(&jl); err != nil {
			return fmt.Errorf("layer %s: %w", jl.Path, err)
		}
		if _, err := b.Write(escapeInvisible(line.Bytes()[:line.Len()-1])); err != nil { // Encode ends the value with a newline
			return err
		}
	}
	if len(an.Result.Rows) > 0 {
		b.WriteString("\n  ")
	}
	b.WriteString("],\n")
	field("totals", doc.Totals, false)
	field("errors", doc.Errors, false)
	field("warnings", doc.Warnings, false)
	field("memory", doc.Memory, false)
	field("fit", doc.Fit, false)
	if err := field("time", doc.Time, true); err != nil {
		return err
	}
	b.WriteString("}\n")
	return b.Flush()
}

// escapeInvisible returns the encoded JSON data with every C1 control
// (U+0080–U+009F: a terminal acts on the 8-bit CSI, OSC and string
// terminator, and U+0085 breaks lines) and every bidirectional control
// (U+061C, U+200E, U+200F, U+202A–U+202E, U+2066–U+2069: they reorder the
// text around them) written as a \uXXXX escape. In encoded JSON such a
// character can stand only inside a string, where the escape means the
// same character, so the data decodes to the same values. Data with none
// comes back as it is, without a copy.
func escapeInvisible(data []byte) []byte {
	i := invisibleAt(data)
	if i < 0 {
		return data
	}
	out := make([]byte, 0, len(data)+16)
	for i >= 0 {
		r, n := utf8.DecodeRune(data[i:])
		out = append(out, data[:i]...)
		out = append(out, '\\', 'u', hexDigit[r>>12&0xf], hexDigit[r>>8&0xf], hexDigit[r>>4&0xf], hexDigit[r&0xf])
		data = data[i+n:]
		i = invisibleAt(data)
	}
	return append(out, data...)
}

const hexDigit = "0123456789abcdef"

// invisibleAt returns where the first character escapeInvisible escapes
// starts in data, or -1.
func invisibleAt(data []byte) int {
	for i := 0; i < len(data); i++ {
		if data[i] < utf8.RuneSelf {
			continue
		}
		r, n := utf8.DecodeRune(data[i:])
		switch {
		case r >= 0x80 && r <= 0x9f,
			r == 0x061c, r == 0x200e, r == 0x200f,
			r >= 0x202a && r <= 0x202e,
			r >= 0x2066 && r <= 0x2069:
			return i
		}
		i += n - 1
	}
	return -1
}
