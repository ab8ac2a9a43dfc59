package editor

import (
	"fmt"
	"math/rand"
	"os"
	"os/exec"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"stackfit/engine"
)

// randomLayers builds a random list of layers with blocks nested up to
// depth levels.
func randomLayers(rng *rand.Rand, n, depth int) []engine.Layer {
	ls := make([]engine.Layer, n)
	for i := range ls {
		if depth > 0 && rng.Intn(4) == 0 {
			ls[i] = engine.Layer{Kind: engine.KindBlock, Repeat: 2, Body: randomLayers(rng, rng.Intn(4), depth-1)}
			continue
		}
		ls[i] = engine.Layer{Kind: engine.KindConv, Filters: int64(8 + rng.Intn(8)), Kernel: engine.Square(3)}
	}
	return ls
}

// randomList returns a pointer to a random list in s: its layers or a
// block body.
func randomList(rng *rand.Rand, ls *[]engine.Layer) *[]engine.Layer {
	for rng.Intn(3) > 0 {
		var blocks []int
		for i := range *ls {
			if (*ls)[i].Body != nil {
				blocks = append(blocks, i)
			}
		}
		if len(blocks) == 0 {
			break
		}
		ls = &(*ls)[blocks[rng.Intn(len(blocks))]].Body
	}
	return ls
}

// randomEdit changes s in place the ways editor commands do: a field of
// one layer, an inserted or deleted item, a range replaced, a body
// emptied or unset, the stack's own fields.
func randomEdit(rng *rand.Rand, s *engine.Stack) {
	ls := randomList(rng, &s.Layers)
	switch op := rng.Intn(7); {
	case op == 0 && len(*ls) > 0:
		(*ls)[rng.Intn(len(*ls))].Filters++
	case op == 1:
		at := rng.Intn(len(*ls) + 1)
		*ls = append((*ls)[:at], append([]engine.Layer{{Kind: engine.KindAct}}, (*ls)[at:]...)...)
	case op == 2 && len(*ls) > 0:
		at := rng.Intn(len(*ls))
		*ls = append((*ls)[:at], (*ls)[at+1:]...)
	case op == 3 && len(*ls) > 1:
		a := rng.Intn(len(*ls) - 1)
		*ls = append((*ls)[:a], append(randomLayers(rng, rng.Intn(3), 1), (*ls)[a+2:]...)...)
	case op == 4:
		*ls = []engine.Layer{}
	case op == 5:
		*ls = nil
	default:
		s.Name = fmt.Sprintf("net %d", rng.Intn(100))
		s.Input.H++
	}
}

// TestHistoryStepsExact checks on random stacks and random edits that
// undo walks back through every earlier state exactly (field by field,
// bodies, nil and empty lists, the stack's own fields) and redo forward
// again, and that a step holds only what its change replaced.
func TestHistoryStepsExact(t *testing.T) {
	for seed := int64(1); seed <= 200; seed++ {
		rng := rand.New(rand.NewSource(seed))
		cur := &engine.Stack{Name: "net", Input: engine.Shape{C: 3, H: 32, W: 32}, Layers: randomLayers(rng, 1+rng.Intn(6), 3)}
		var h history
		states := []*engine.Stack{cur.Clone()}
		for i := 0; i < 12; i++ {
			next := cur.Clone()
			randomEdit(rng, next)
			h.push(snapshot{stack: cur, cursor: i}, next)
			cur = next
			states = append(states, cur.Clone())
		}
		same := func(a, b *engine.Stack) bool {
			return a.Name == b.Name && a.Note == b.Note && a.Input == b.Input && a.Training == b.Training && engine.EqualLayers(a.Layers, b.Layers)
		}
		for i := len(states) - 2; i >= 0; i-- {
			back, ok := h.back(snapshot{stack: cur, cursor: 99})
			if !ok || !same(back.stack, states[i]) || back.cursor != i {
				t.Fatalf("seed %d: undo to state %d gives %+v (cursor %d), want %+v", seed, i, back.stack.Layers, back.cursor, states[i].Layers)
			}
			cur = back.stack
		}
		if _, ok := h.back(snapshot{stack: cur}); ok {
			t.Fatalf("seed %d: more undo steps than changes", seed)
		}
		for i := 1; i < len(states); i++ {
			fwd, ok := h.forward(snapshot{stack: cur, cursor: i - 1})
			if !ok || !same(fwd.stack, states[i]) {
				t.Fatalf("seed %d: redo to state %d gives %+v, want %+v", seed, i, fwd.stack.Layers, states[i].Layers)
			}
			cur = fwd.stack
		}
		held := 0
		for _, s := range append(h.undo, h.redo...) {
			held += s.size
		}
		if held != h.held {
			t.Fatalf("seed %d: history counts %d layers held, its steps hold %d", seed, h.held, held)
		}
	}
}

// TestHistoryHoldsOnlyTheChange checks that a one-field change deep in a
// large stack costs a step of one layer, and that a change rewriting every
// layer pushes old steps out at the layer bound.
func TestHistoryHoldsOnlyTheChange(t *testing.T) {
	big := &engine.Stack{Input: engine.Shape{C: 3, H: 64, W: 64}}
	for range 100 {
		body := make([]engine.Layer, 100)
		for i := range body {
			body[i] = engine.Layer{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3)}
		}
		big.Layers = append(big.Layers, engine.Layer{Kind: engine.KindBlock, Repeat: 1, Body: body})
	}
	var h history
	next := big.Clone()
	next.Layers[40].Body[7].Filters = 16
	h.push(snapshot{stack: big}, next)
	if s := h.undo[0]; s.size != 1 || len(s.at) != 1 || s.at[0] != 40 || s.from != 7 {
		t.Errorf("a one-field change holds %d layers at %v from %d", s.size, s.at, s.from)
	}
	for i := 0; i < 20; i++ { // each rewrites all 10,100 layers
		cur := next
		next = cur.Clone()
		for j := range next.Layers {
			next.Layers[j].Repeat++
		}
		h.push(snapshot{stack: cur}, next)
	}
	if h.held > historyLayers || len(h.undo) != historyLayers/10100 {
		t.Errorf("history holds %d layers in %d steps; want at most %d layers", h.held, len(h.undo), historyLayers)
	}
}

// TestUndoHistoryMemory makes 256 edits in the editor on a 10,000-layer
// stack and holds the process to 80 MiB peak RSS, with every step still
// undoable. The edits run in a child process that does only this and
// reports its own peak (VmHWM in /proc/self/status, the kernel's
// high-water mark of resident memory; the child's ru_maxrss would also
// count the parent's pages at the moment of exec). Before steps shared
// unchanged layers, each edit kept a whole copy of the stack, about 3 MB.
func TestUndoHistoryMemory(t *testing.T) {
	if os.Getenv("STACKFIT_HISTORY_CHILD") == "1" {
		undoHistoryChild(t)
		return
	}
	if testing.Short() {
		t.Skip("-short: skips the child process")
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestUndoHistoryMemory$", "-test.count=1")
	cmd.Env = append(os.Environ(), "STACKFIT_HISTORY_CHILD=1", "GOMEMLIMIT=", "GOGC=")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("child: %v\n%s", err, out)
	}
	var kb int64
	for _, line := range strings.Split(string(out), "\n") {
		if v, ok := strings.CutPrefix(line, "peak-rss-kB "); ok {
			kb, _ = strconv.ParseInt(v, 10, 64)
		}
	}
	if kb == 0 {
		t.Skipf("the child could not read its peak:\n%s", out)
	}
	rss := kb << 10
	t.Logf("peak RSS after 256 edits on 10,000 layers: %.1f MiB", float64(rss)/(1<<20))
	if rss > 80<<20 {
		t.Errorf("peak RSS %.1f MiB, over 80 MiB", float64(rss)/(1<<20))
	}
}

func undoHistoryChild(t *testing.T) {
	s := &engine.Stack{Name: "ten thousand", Input: engine.Shape{C: 8, H: 16, W: 16}}
	for i := range 10_000 {
		l := engine.Layer{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Pad: engine.Padding{Mode: engine.PadSame}}
		if i%2 == 1 {
			l = engine.Layer{Kind: engine.KindAct}
		}
		s.Layers = append(s.Layers, l)
	}
	m := newModel(t, s, 100, 30)
	const edits = 256
	for i := range edits {
		if i%2 == 0 {
			press(m, "j", "j")
		}
		press(m, ">") // filters ×2 on the selected conv: one layer changes
	}
	if len(m.hist.undo) != edits {
		t.Fatalf("%d undo steps, want 256", len(m.hist.undo))
	}
	status, err := os.ReadFile("/proc/self/status")
	if err != nil {
		t.Skip("no /proc/self/status to read the peak from")
	}
	for _, line := range strings.Split(string(status), "\n") {
		if v, ok := strings.CutPrefix(line, "VmHWM:"); ok {
			fmt.Printf("peak-rss-kB %s\n", strings.TrimSuffix(strings.TrimSpace(v), " kB"))
		}
	}
	runtime.KeepAlive(m)
}

// BenchmarkUnfold folds and unfolds a residual block of 100 repeats (its
// first repeat's layers, the rows the engine adds and 99 repeat headers),
// drawing a frame after each, at 120×40.
func BenchmarkUnfold(b *testing.B) {
	body := []engine.Layer{
		{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}, NoBias: true},
		{Kind: engine.KindNorm}, {Kind: engine.KindAct},
		{Kind: engine.KindConv, Filters: 64, Kernel: engine.Square(3), Pad: engine.Padding{Size: engine.Square(1)}, NoBias: true},
		{Kind: engine.KindNorm},
	}
	s := &engine.Stack{Input: engine.Shape{C: 64, H: 56, W: 56}, Training: engine.Training{Batch: 32, Budget: 80 << 30},
		Layers: []engine.Layer{{Kind: engine.KindBlock, Repeat: 100, Residual: true, HasPostAct: true, Body: body}}}
	m := newModel(b, s, 120, 40)
	space := keyMsg("space")
	b.ReportAllocs()
	for b.Loop() {
		m.Update(space)
		_ = m.View()
	}
}
