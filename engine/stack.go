package engine

import "slices"

// Stack is a whole network description: a name, the per-sample input shape,
// the layers in order, the training settings, the settings of the stage
// InsertStage adds and the stack's own field defaults.
type Stack struct {
	Name     string
	Note     string
	Input    Shape
	Layers   []Layer
	Training Training
	Stage    Stage
	// Defaults are the stack's own field defaults per kind (a norm's
	// eps): every layer that leaves such a field unwritten takes them.
	Defaults Defaults
	// Quiet lists the warnings this stack silences (each a warning code,
	// once): Evaluate does not report them.
	Quiet []Code
	// Units are the sub-stacks the file defines once and uses by name
	// (see ExpandUnits).
	Units []Unit
}

// Clone returns a deep copy of the stack, safe to edit independently.
func (s *Stack) Clone() *Stack {
	c := *s
	c.Layers = CloneLayers(s.Layers)
	c.Quiet = slices.Clone(s.Quiet)
	c.Units = CloneUnits(s.Units)
	c.Defaults = s.Defaults.Clone()
	return &c
}

// CloneLayers deep-copies a slice of layers, block bodies included.
func CloneLayers(ls []Layer) []Layer {
	if ls == nil {
		return nil
	}
	out := make([]Layer, len(ls))
	copy(out, ls)
	for i := range out {
		out[i].Args = slices.Clone(out[i].Args)
		out[i].Binds = slices.Clone(out[i].Binds)
		if out[i].Body != nil {
			out[i].Body = CloneLayers(out[i].Body)
		}
	}
	return out
}

// BodyAt returns the item whose body path p (an even number of segments,
// item and repeat or branch number per level) opens: the block, gate or
// fork, and for a fork the branch too. Both are nil when p opens nothing.
func (s *Stack) BodyAt(p Path) (item, branch *Layer) {
	if p.Len() < 2 || p.Len()%2 != 0 {
		return nil, nil
	}
	ls := s.Layers
	for i := 0; i < p.Len(); i += 2 {
		k := p.At(i) - 1
		if k < 0 || k >= len(ls) || !SpecOf(ls[k].Kind).Body {
			return nil, nil
		}
		item, branch = &ls[k], nil
		n := p.At(i + 1)
		if item.Kind == KindFork {
			if n < 1 || n > len(item.Body) {
				return nil, nil
			}
			branch = &item.Body[n-1]
			ls = branch.Body
			continue
		}
		if n > int(max(item.Repeat, 1)) {
			return nil, nil
		}
		ls = item.Body
	}
	return item, branch
}

// ItemPath returns the path of the item at idx (0-based indices into the
// stack's list, then into each enclosing item's body): its own row's path,
// or for a block, gate, fork or branch the prefix its rows share. A block
// or gate adds its repeat (1) before its body's numbers; a fork's body
// items are its branches, numbered directly, and a branch's layers follow
// its number ("4.2.1" is layer 1 of branch 2 of the fork at item 4).
func (s *Stack) ItemPath(idx []int) Path {
	var p Path
	ls := s.Layers
	for k, i := range idx {
		p.push(i + 1)
		if i < 0 || i >= len(ls) || k == len(idx)-1 {
			break
		}
		l := &ls[i]
		switch l.Kind {
		case KindFork, KindBranch:
		default:
			p.push(1)
		}
		ls = l.Body
	}
	return p
}

// Levels returns how many nesting levels enclose the item at idx: blocks,
// gates and forks count one each (a fork's branch belongs to its fork's
// level).
func (s *Stack) Levels(idx []int) int {
	n := 0
	ls := s.Layers
	for _, i := range idx[:max(len(idx)-1, 0)] {
		if i < 0 || i >= len(ls) {
			break
		}
		if ls[i].Kind != KindBranch {
			n++
		}
		ls = ls[i].Body
	}
	return n
}
