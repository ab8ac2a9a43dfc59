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
	c.Layers = append([]Layer(nil), s.Layers...)
	return &c
}
