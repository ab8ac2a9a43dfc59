// Package report turns an evaluated stack into the printouts stackfit
// offers: JSON for scripts and a plain-text table for terminals.
package report

import (
	"encoding/json"
	"io"

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
}

// JSONLayer is one row of the flattened stack.
type JSONLayer struct {
	Path     string     `json:"path"`
	Kind     string     `json:"kind"`
	Name     string     `json:"name"`
	Role     string     `json:"role"`   // layer, shortcut, residual-add or after-add
	Status   string     `json:"status"` // ok, error or unresolved
	Out      *[3]int64  `json:"out"`    // null unless status is ok
	Params   int64      `json:"params"`
	Buffers  int64      `json:"buffers"`
	MACs     int64      `json:"macs"`
	RF       [2]float64 `json:"rf"`
	Jump     [2]float64 `json:"jump"`
	Errors   []string   `json:"errors"`
	Warnings []string   `json:"warnings"`
	Notes    []string   `json:"notes"` // facts such as how much a merge crops
}

// JSONTotals sums the resolved rows.
type JSONTotals struct {
	Params  int64 `json:"params"`
	Buffers int64 `json:"buffers"`
	MACs    int64 `json:"macs"`
}

// BuildJSON converts a result into the JSON document.
func BuildJSON(s *engine.Stack, r *engine.Result) *JSON {
	doc := &JSON{
		Name:     s.Name,
		Input:    [3]int64{s.Input.C, s.Input.H, s.Input.W},
		Layers:   make([]JSONLayer, len(r.Rows)),
		Totals:   JSONTotals{r.Totals.Params, r.Totals.Buffers, r.Totals.MACs},
		Errors:   []string{},
		Warnings: []string{},
	}
	for _, d := range r.DiagsFor(-1) {
		doc.Errors = append(doc.Errors, d.Message())
	}
	for i := range r.Rows {
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
			jl.Out = &[3]int64{row.Out.C, row.Out.H, row.Out.W}
		}
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
		doc.Layers[i] = jl
	}
	return doc
}

// WriteJSON writes the JSON report, indented, with a final newline.
func WriteJSON(w io.Writer, s *engine.Stack, r *engine.Result) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(BuildJSON(s, r))
}
