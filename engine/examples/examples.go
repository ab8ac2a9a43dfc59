// Package examples holds the stacks stackfit ships with.
package examples

import _ "embed"

//go:embed fruit-grader.yaml
var fruitGrader []byte

// FruitGrader returns the built-in example's stack file: a small classifier
// for a camera that grades apples on a sorting line.
func FruitGrader() []byte { return append([]byte(nil), fruitGrader...) }

// FruitGraderName is the file name the example is shown under.
const FruitGraderName = "fruit-grader.yaml"
