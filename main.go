// Command stackfit sizes convolutional networks: output shapes, parameters,
// multiply-accumulates and receptive fields for every layer of a stack file.
package main

import (
	"os"

	"stackfit/ui/cli"
)

func main() {
	os.Exit(cli.Main())
}
