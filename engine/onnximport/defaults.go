package onnximport

import (
	"slices"

	"stackfit/engine"
)

// pytorchEps is the ε PyTorch's norms take when none is given (and ONNX's
// BatchNormalization and InstanceNormalization when epsilon is absent).
const pytorchEps = 1e-5

// normEps sets the file's default ε for norms to the value most norms
// share when that is not PyTorch's, and leaves it out of those norms; a
// norm with another ε keeps it written (PyTorch's 1e-5 included, then).
// Without such a default, PyTorch's own ε is left out.
func normEps(s *engine.Stack) {
	var norms []*engine.Layer
	walk(s.Layers, func(l *engine.Layer) {
		if l.Kind == engine.KindNorm {
			norms = append(norms, l)
		}
	})
	count := map[float64]int{}
	best, most := pytorchEps, 0
	for _, l := range norms {
		e := l.Eps
		if e == 0 {
			e = pytorchEps
		}
		count[e]++
		if count[e] > most || count[e] == most && e == pytorchEps {
			best, most = e, count[e]
		}
	}
	shared := best != pytorchEps && most >= 2 && 2*most > len(norms)
	// The norms of the units' own layers follow the same rule: the uses'
	// expansions were counted above, and the file writes the units.
	for i := range s.Units {
		walk(s.Units[i].Body, func(l *engine.Layer) {
			if l.Kind == engine.KindNorm {
				norms = append(norms, l)
			}
		})
	}
	for _, l := range norms {
		switch {
		case shared && l.Eps == best:
			l.Eps = 0
		case shared && l.Eps == 0:
			l.Eps = pytorchEps
		case !shared && l.Eps == pytorchEps:
			l.Eps = 0
		}
	}
	if shared {
		_ = s.Defaults.Set(engine.KindNorm, "eps", engine.Value{Float: best}) // a field norms may default
	}
}

// Grouped convolutions are written with their group width (input
// channels per group) when every grouped convolution of the stack that is
// not depthwise has the same group width and their group counts differ:
// RegNet's stages keep one group width while the widths, and so the
// group counts, grow (Radosavovic et al. 2020, section 3). finish does it
// before the units are found, so that they carry it.

// sharedGroupWidth is the group width every grouped, not depthwise
// convolution of ls has when their group counts differ, else 0; r is ls
// evaluated.
func sharedGroupWidth(s *engine.Stack, ls []engine.Layer) (w int64, r *engine.Result) {
	r = engine.Evaluate(&engine.Stack{Input: s.Input, Units: s.Units, Defaults: s.Defaults, Layers: ls})
	if r.Errors != 0 {
		return 0, r
	}
	in := map[*engine.Layer]int64{} // −1: the layer's rows differ in input channels
	for i := range r.Rows {
		row := &r.Rows[i]
		l := row.Layer
		if !grouped(l) || row.Role != engine.RoleLayer || l.Groups == row.In.C {
			continue // a group per channel is depthwise, not a group width of 1
		}
		if c, seen := in[l]; seen && c != row.In.C {
			in[l] = -1
		} else {
			in[l] = row.In.C
		}
	}
	var width int64
	var groups []int64
	for l, c := range in {
		if c < 1 || c%l.Groups != 0 {
			return 0, r
		}
		gw := c / l.Groups
		if width != 0 && gw != width {
			return 0, r
		}
		width = gw
		if !slices.Contains(groups, l.Groups) {
			groups = append(groups, l.Groups)
		}
	}
	if len(in) < 2 || len(groups) < 2 {
		return 0, r
	}
	return width, r
}

// grouped reports whether l is a grouped convolution that is not
// depthwise, written with a group count.
func grouped(l *engine.Layer) bool {
	return l.Kind == engine.KindConv && !l.Depthwise && l.Groups > 1
}

// withGroupWidth returns a copy of ls with its grouped convolutions
// written with group width w, and false when that would change a count
// of before (ls evaluated).
func withGroupWidth(s *engine.Stack, ls []engine.Layer, w int64, before *engine.Result) ([]engine.Layer, bool) {
	out := engine.CloneLayers(ls)
	walk(out, func(l *engine.Layer) {
		if grouped(l) {
			l.Groups, l.GroupWidth = 0, w
		}
	})
	after := engine.Evaluate(&engine.Stack{Input: s.Input, Units: s.Units, Defaults: s.Defaults, Layers: out})
	return out, after.Errors == 0 && after.Totals == before.Totals && len(after.Rows) == len(before.Rows)
}

// walk calls fn on every layer of ls, bodies included.
func walk(ls []engine.Layer, fn func(*engine.Layer)) {
	for i := range ls {
		fn(&ls[i])
		walk(ls[i].Body, fn)
	}
}
