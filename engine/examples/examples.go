// Package examples holds the stacks stackfit ships with.
package examples

import _ "embed"

//go:embed fruit-grader.yaml
var fruitGrader []byte

//go:embed fruit-grader-board.yaml
var fruitGraderBoard []byte

//go:embed cap-inspector.yaml
var capInspector []byte

// FruitGrader returns the built-in example's stack file: a small classifier
// for a camera that grades apples on a sorting line.
func FruitGrader() []byte { return append([]byte(nil), fruitGrader...) }

// FruitGraderName is the file name the example is shown under.
const FruitGraderName = "fruit-grader.yaml"

// Example is one built-in stack file.
type Example struct {
	Name  string // what the example command calls it
	About string // one line
	data  []byte
}

// Data returns a copy of the example's stack file.
func (e Example) Data() []byte { return append([]byte(nil), e.data...) }

// All lists the built-in examples, the default first.
func All() []Example {
	return []Example{
		{Name: "fruit-grader", About: "a plain conv classifier that grades apples on a sorting line (the default)", data: fruitGrader},
		{Name: "fruit-grader-board", About: "the same job for the camera board: inverted residuals, gates, relative widths, a fork", data: fruitGraderBoard},
		{Name: "cap-inspector", About: "a bottle-cap inspector written with units (a brick and a residual stage used by name) and a spatial gate", data: capInspector},
	}
}

// Find returns the example called name.
func Find(name string) (Example, bool) {
	for _, e := range All() {
		if e.Name == name {
			return e, true
		}
	}
	return Example{}, false
}
