// Command stackfit sizes convolutional networks: output shapes, parameters,
// multiply-accumulates and receptive fields for every layer of a stack file.
package main

import (
	"os"
	"runtime/debug"

	"stackfit/ui/cli"
)

// softMemoryLimit is the heap size past which the garbage collector works
// harder instead of letting garbage pile up: a report of a stack that
// expands to a million rows then peaks near 210 MB instead of 370 MB. It
// is a soft limit (nothing fails past it); GOMEMLIMIT overrides it.
const softMemoryLimit = 256 << 20

func main() {
	if os.Getenv("GOMEMLIMIT") == "" {
		debug.SetMemoryLimit(softMemoryLimit)
	}
	os.Exit(cli.Main())
}
