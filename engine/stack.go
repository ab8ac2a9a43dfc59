package engine

// Stack is a whole network description: a name, the per-sample input shape,
// the layers in order and the training settings.
type Stack struct {
	Name     string
	Note     string
	Input    Shape
	Layers   []Layer
	Training Training
}

// Clone returns a deep copy of the stack, safe to edit independently.
func (s *Stack) Clone() *Stack {
	c := *s
	c.Layers = CloneLayers(s.Layers)
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
		if out[i].Body != nil {
			out[i].Body = CloneLayers(out[i].Body)
		}
	}
	return out
}

// BlockAt returns the block whose repeat the path prefix p (ending in a
// repeat number) names, e.g. "4.2" → the block at item 4; nil if p does not
// name a block repeat.
func (s *Stack) BlockAt(p Path) *Layer {
	if p.Len() < 2 || p.Len()%2 != 0 {
		return nil
	}
	ls := s.Layers
	var l *Layer
	for i := 0; i < p.Len(); i += 2 {
		k := p.At(i) - 1
		if k < 0 || k >= len(ls) || !SpecOf(ls[k].Kind).Body || p.At(i+1) > int(max(ls[k].Repeat, 1)) {
			return nil
		}
		l = &ls[k]
		ls = l.Body
	}
	return l
}
