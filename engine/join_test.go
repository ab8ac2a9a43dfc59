package engine_test

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// loadPaper reads a stack of testdata/papers.
func loadPaper(t *testing.T, file string) *engine.Stack {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "testdata", "papers", file))
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(b)
	if err != nil {
		t.Fatalf("%s: %v", file, err)
	}
	return s
}

// TestPaperJoins checks the stacks with additive forks and branches from
// named outputs: output shape, parameters, buffer elements, the final
// receptive field, and the bytes kept for backward per sample (fp32). The
// counts, shapes and bytes are what Debian's PyTorch 1.13 gives for the
// papers' modules written by hand (testdata/papers/joins_reference.py,
// held by TestPaperJoinsAgainstPyTorch in engine/export); the receptive
// fields are worked by hand.
func TestPaperJoins(t *testing.T) {
	for _, c := range []struct {
		file, source     string
		out              engine.Shape
		params, buffers  int64
		rf               float64
		saved            int64
		joinRow, joinOut string // a join row's path and output shape
	}{
		// He et al. 2019, Figure 2(c): the main path's 1×1, 3×3 s2, 1×1
		// (receptive field 3) and the shortcut's 2×2 pool (2) meet at the
		// join, which takes the larger; two 3×3 repeats add 4 each.
		{"resnet-d-stage.yaml", "He et al. 2019, ResNet-D", engine.Shape{C: 128, H: 16, W: 16}, 59776, 1418, 11, 1835008, "1.join", "128×16×16"},
		// Lin et al. 2017, Figure 3: three 3×3 s2 stages (15), the 3×3
		// output convolution at jump 2 (19); the lateral branches from c4
		// and c3 start from their receptive fields (7 and 3).
		{"fpn-top-down.yaml", "Lin et al. 2017, FPN", engine.Shape{C: 32, H: 32, W: 32}, 36624, 227, 19, 409600, "12.join", "32×32×32"},
		// Gao et al. 2019, Figure 2: three chained 3×3s give 7.
		{"res2net-unit.yaml", "Gao et al. 2019, Res2Net", engine.Shape{C: 64, H: 16, W: 16}, 6064, 245, 7, 360448, "1.1.4.4.1.join", "8×16×16"},
	} {
		t.Run(c.file, func(t *testing.T) {
			r := engine.Evaluate(loadPaper(t, c.file))
			if r.Errors != 0 {
				t.Fatalf("%s: errors %v", c.source, r.Diags)
			}
			if r.Output != c.out || r.Totals.Params != c.params || r.Totals.Buffers != c.buffers {
				t.Errorf("%s: output %v, params %d, buffers %d; want %v, %d, %d", c.source, r.Output, r.Totals.Params, r.Totals.Buffers, c.out, c.params, c.buffers)
			}
			if last := r.Rows[len(r.Rows)-1]; last.RF.H != c.rf {
				t.Errorf("%s: final receptive field %g, want %g", c.source, last.RF.H, c.rf)
			}
			var m engine.Memory
			r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
			if m.ActPerSample != c.saved {
				t.Errorf("%s: keeps %d bytes per sample, PyTorch's autograd %d", c.source, m.ActPerSample, c.saved)
			}
			found := false
			for _, row := range r.Rows {
				if row.Path.String() == c.joinRow {
					found = true
					if row.Out.String() != c.joinOut || row.Params != 0 || row.MACs != 0 {
						t.Errorf("%s: join %s is %v with %d params, %d MACs; want %s, none", c.source, c.joinRow, row.Out, row.Params, row.MACs, c.joinOut)
					}
				}
			}
			if !found {
				t.Errorf("%s: no row %s", c.source, c.joinRow)
			}
		})
	}
}

// TestPaperJoinsRoundTrip checks that the stacks with join: add and
// branches with from: save in canonical form and read back the same
// (common practice for every file stackfit reads).
func TestPaperJoinsRoundTrip(t *testing.T) {
	for _, f := range []string{"resnet-d-stage.yaml", "fpn-top-down.yaml", "res2net-unit.yaml"} {
		s := loadPaper(t, f)
		a, err := stackfile.Save(s)
		if err != nil {
			t.Fatal(err)
		}
		s2, err := stackfile.Load(a)
		if err != nil {
			t.Fatalf("%s: saved form does not load: %v\n%s", f, err, a)
		}
		b, _ := stackfile.Save(s2)
		if !bytes.Equal(a, b) || !engine.EqualLayers(s.Layers, s2.Layers) {
			t.Errorf("%s: does not read back the same:\n%s", f, a)
		}
		if !bytes.Contains(a, []byte("join: add")) || f != "res2net-unit.yaml" && f != "resnet-d-stage.yaml" && !bytes.Contains(a, []byte("from: c4")) {
			t.Errorf("%s: the saved form lost the join or a branch's from:\n%s", f, a)
		}
	}
}

// TestJoinDiagnostics checks the errors of additive forks and branches
// from named outputs: each names the branch, the field and the fix.
// Shapes are worked by hand (common practice: an element-wise sum needs
// equal shapes; a branch can only read an output computed before it).
func TestJoinDiagnostics(t *testing.T) {
	conv := func(f, k, s int64) engine.Layer {
		return engine.Layer{Kind: engine.KindConv, Filters: f, Kernel: engine.Square(k), Stride: engine.Square(s)}
	}
	branch := func(from string, ls ...engine.Layer) engine.Layer {
		return engine.Layer{Kind: engine.KindBranch, From: from, Body: ls}
	}
	named := func(l engine.Layer, n string) engine.Layer { l.Name = n; return l }
	add := func(split bool, bs ...engine.Layer) engine.Layer {
		return engine.Layer{Kind: engine.KindFork, JoinAdd: true, Split: split, Body: bs}
	}
	for _, c := range []struct {
		name   string
		layers []engine.Layer
		code   engine.Code
		field  string
		text   string
	}{
		{"channels differ", []engine.Layer{add(false, branch("", conv(4, 1, 1)), branch("", conv(6, 1, 1)))},
			engine.ErrJoinShape, "channels", "branch 2 ends in 6 channels but branch 1 in 4; join: add sums the branches, so their channels must be equal — end the branch with a 1×1 conv of 4 filters"},
		{"sizes differ", []engine.Layer{add(false, branch("", conv(4, 1, 1)), branch("", conv(4, 1, 2)))},
			engine.ErrJoinShape, "size", "branch 2 ends in 8×8 but branch 1 in 16×16"},
		{"empty branch of another width", []engine.Layer{add(false, branch(""), branch("", conv(8, 1, 1)))},
			engine.ErrJoinShape, "channels", "branch 2 ends in 8 channels but branch 1 in 5"},
		{"a slip of the name", []engine.Layer{named(conv(4, 1, 1), "lateral"), add(false, branch(""), branch("latteral"))},
			engine.ErrBranchFrom, "from", `branch 2 starts from "latteral", but no earlier layer or block has that name; did you mean "lateral"?`},
		{"a name that comes later", []engine.Layer{add(false, branch(""), branch("late")), named(conv(4, 1, 1), "late")},
			engine.ErrBranchFrom, "from", `branch 2 starts from "late", which comes later in the stack`},
		{"a name nothing has", []engine.Layer{add(false, branch(""), branch("nowhere"))},
			engine.ErrBranchFrom, "from", "name the output it should read with name: nowhere"},
		{"from in a split fork", []engine.Layer{named(conv(4, 1, 1), "a"), {Kind: engine.KindFork, Split: true, Body: []engine.Layer{branch(""), branch("a")}}},
			engine.ErrBranchFromSplit, "from", "use input: copy, or drop from:"},
	} {
		t.Run(c.name, func(t *testing.T) {
			r := engine.Evaluate(&engine.Stack{Input: engine.Shape{C: 5, H: 16, W: 16}, Layers: c.layers})
			for _, d := range r.Diags {
				if d.Code == c.code {
					if d.Severity != engine.SevError || d.Field != c.field || !strings.Contains(d.Message(), c.text) {
						t.Errorf("%s %s %q, want an error on %s containing %q", d.Severity, d.Field, d.Message(), c.field, c.text)
					}
					if !strings.Contains(r.Where(d.Row), "fork") {
						t.Errorf("reported at %s, want the fork's join", r.Where(d.Row))
					}
					return
				}
			}
			t.Errorf("no diagnostic %s in %v", c.code.Name(), r.Diags)
		})
	}
}

// TestJoinKeepsNamedOutputAlive checks the step simulation: a named
// output that only a later join reads (an empty branch from it) stays
// alive until that join, as PyTorch keeps a tensor while a later
// operation still reads it (common practice: a reference keeps it). The
// stack, 1×8×8 in: conv a 4×8×8 (256 values), pool to 4×4×4 (64), conv
// (64), upsample to 4×8×8 (256), then a fork adding a and the flow: at
// the join a (256), the upsampled map (256) and the sum (256) are alive,
// 768 values, the most of the pass that keeps nothing for backward. Were
// a freed after the pool, the most would be 576 (the join without a).
func TestJoinKeepsNamedOutputAlive(t *testing.T) {
	for _, c := range []struct {
		name     string
		branches []engine.Layer
		want     int64
	}{
		{"named output first", []engine.Layer{{Kind: engine.KindBranch, From: "a"}, {Kind: engine.KindBranch}}, 768},
		{"named output second", []engine.Layer{{Kind: engine.KindBranch}, {Kind: engine.KindBranch, From: "a"}}, 768},
	} {
		s := &engine.Stack{Input: engine.Shape{C: 1, H: 8, W: 8}, Layers: []engine.Layer{
			{Kind: engine.KindConv, Filters: 4, Kernel: engine.Square(1), Name: "a"},
			{Kind: engine.KindPool, Kernel: engine.Square(2)},
			{Kind: engine.KindConv, Filters: 4, Kernel: engine.Square(1)},
			{Kind: engine.KindUpsample, Factor: engine.Square(2)},
			{Kind: engine.KindFork, JoinAdd: true, Body: c.branches},
		}}
		r := engine.Evaluate(s)
		if r.Errors != 0 {
			t.Fatalf("%s: %v", c.name, r.Diags)
		}
		var m engine.Memory
		r.Memory(engine.Training{Batch: 1}, engine.DefaultAssumptions(), &m)
		if m.LivePerSample != c.want {
			t.Errorf("%s: the most values alive at once %d, want %d", c.name, m.LivePerSample, c.want)
		}
	}
}
