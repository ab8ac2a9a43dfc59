package export

import (
	"bytes"
	"testing"

	"stackfit/engine"
)

// pieces records how the bytes of an export arrive.
type pieces struct {
	writes, largest int
	all             bytes.Buffer
}

func (p *pieces) Write(b []byte) (int, error) {
	p.writes++
	p.largest = max(p.largest, len(b))
	return p.all.Write(b)
}

// TestExportStreams checks that the module is written a buffer at a time
// as it is generated, not built whole first (the bounded resources promise
// in the README), and that streaming it changes nothing: the module is
// the same as one written into a single buffer, with every row's line in
// __init__ and in forward.
func TestExportStreams(t *testing.T) {
	s := &engine.Stack{
		Name:  "repeats",
		Input: engine.Shape{C: 8, H: 8, W: 8},
		Layers: []engine.Layer{{Kind: engine.KindBlock, Repeat: 64, Body: []engine.Layer{
			{Kind: engine.KindBlock, Repeat: 128, Body: []engine.Layer{
				{Kind: engine.KindAct, Act: engine.ActReLU},
				{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(1)},
			}},
		}}},
	}
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	var p pieces
	if err := PyTorch(&p, an, "repeats.yaml"); err != nil {
		t.Fatal(err)
	}
	const piece = 64 << 10
	if p.largest > piece || p.writes < p.all.Len()/piece {
		t.Errorf("%d bytes in %d writes, the largest %d; want pieces of at most %d", p.all.Len(), p.writes, p.largest, piece)
	}
	var whole bytes.Buffer
	if err := PyTorch(&whole, an, "repeats.yaml"); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(whole.Bytes(), p.all.Bytes()) {
		t.Error("the streamed module differs from the buffered one")
	}
	text := p.all.String()
	last := "self.l1_64_1_128_2 = nn.Conv2d(8, 8, (1, 1)"
	if !bytes.Contains(p.all.Bytes(), []byte(last)) || bytes.Count(p.all.Bytes(), []byte("nn.Conv2d(")) != 64*128 ||
		bytes.Count(p.all.Bytes(), []byte("x = self.l1_")) != 64*128*2 {
		t.Errorf("module lacks rows:\n%.2000s", text)
	}
}
