package report

import (
	"io"
	"testing"

	"stackfit/engine"
)

// chunkWriter records how the bytes of a report arrive.
type chunkWriter struct {
	writes, largest, total int
}

func (c *chunkWriter) Write(p []byte) (int, error) {
	c.writes++
	c.largest = max(c.largest, len(p))
	c.total += len(p)
	return len(p), nil
}

// deepStack is 32,768 rows from a few items: a block of 128 repeats of a
// block of 128 repeats of two layers.
func deepStack() *engine.Stack {
	return &engine.Stack{
		Name:  "repeats",
		Input: engine.Shape{C: 8, H: 8, W: 8},
		Layers: []engine.Layer{{Kind: engine.KindBlock, Repeat: 128, Body: []engine.Layer{
			{Kind: engine.KindBlock, Repeat: 128, Body: []engine.Layer{
				{Kind: engine.KindAct, Act: engine.ActReLU},
				{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(1)},
			}},
		}}},
	}
}

// TestReportsStream checks that every report format hands its output on
// in buffer-sized pieces as it goes rather than building the whole
// document first: a report of a stack that expands to a million rows must
// not hold its hundreds of megabytes of text in memory (the bounded
// resources promise in the README).
func TestReportsStream(t *testing.T) {
	s := deepStack()
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	if n := len(an.Result.Rows); n != 32768 {
		t.Fatalf("%d rows, want 32768", n)
	}
	const piece = 64 << 10
	for name, write := range map[string]func(io.Writer, *engine.Analysis) error{
		"text": WriteText, "markdown": WriteMarkdown, "csv": WriteCSV, "json": WriteJSON,
	} {
		var c chunkWriter
		if err := write(&c, an); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if c.total < 8*piece || c.largest > piece || c.writes < c.total/piece {
			t.Errorf("%s: %d bytes in %d writes, the largest %d; want pieces of at most %d", name, c.total, c.writes, c.largest, piece)
		}
	}
}
