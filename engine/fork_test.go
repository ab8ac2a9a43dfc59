package engine

import (
	"strings"
	"testing"
)

// TestMakeDivisible checks the MobileNet channel rounding against the rule
// torchvision's model source states (_make_divisible in
// torchvision/models/_utils.py): the nearest multiple of the divisor, at
// least the divisor, bumped up one step when that falls more than 10%
// below the value. The expected values are worked by hand from that rule.
func TestMakeDivisible(t *testing.T) {
	for _, c := range []struct {
		v    float64
		want int64
	}{
		{24, 24},       // 32 × 0.75: already a multiple
		{5.6, 8},       // 16 × 0.35: never below the divisor
		{18, 24},       // nearest is 16, but 16 < 0.9·18 = 16.2: one step up
		{60, 64},       // ⌊(60 + 4)/8⌋·8
		{30, 32},       // ⌊34/8⌋·8
		{36, 40},       // ⌊40/8⌋·8
		{134.4, 136},   // 96 × 1.4: ⌊138.4/8⌋·8 = 136 ≥ 120.96
		{3, 8},         // tiny widths round up to the divisor
		{1000.5, 1000}, // ⌊1004.5/8⌋·8 = 1000 ≥ 900.45
	} {
		if got := MakeDivisible(c.v, 8); got != c.want {
			t.Errorf("MakeDivisible(%g, 8) = %d, want %d", c.v, got, c.want)
		}
	}
}

// TestResolveWidth checks the relative widths: a factor rounds half to
// even as Python's round does (torchvision's MobileNetV2 writes
// int(round(inp * expand_ratio))); a divisor rounds down, as Python's //.
func TestResolveWidth(t *testing.T) {
	for _, c := range []struct {
		rel   Rel
		round int64
		in    int64
		want  int64
	}{
		{Rel{Mul: 6}, 0, 24, 144},
		{Rel{Mul: 0.5}, 0, 5, 2},  // 2.5 → 2 (half to even)
		{Rel{Mul: 0.5}, 0, 7, 4},  // 3.5 → 4
		{Rel{Div: 4}, 0, 18, 4},   // 18 // 4
		{Rel{Div: 4}, 8, 72, 24},  // MobileNetV3's squeeze: _make_divisible(72 // 4, 8)
		{Rel{Mul: 6}, 8, 20, 120}, // EfficientNet's expansion: _make_divisible(20 · 6, 8)
		{Rel{Div: 8}, 0, 4, 0},    // rounds to nothing: the caller reports it
	} {
		if got := ResolveWidth(0, c.rel, c.round, c.in); got != c.want {
			t.Errorf("%v round %d of %d = %d, want %d", c.rel, c.round, c.in, got, c.want)
		}
	}
}

// fire is SqueezeNet's fire2 module on its 96×55×55 input (Iandola et al.
// 2016, Table 1): squeeze to 16 with a 1×1 convolution, then 64 1×1 and 64
// 3×3 expand filters side by side, 128 channels out.
func fire() *Stack {
	return &Stack{Input: Shape{96, 55, 55}, Layers: []Layer{
		{Kind: KindConv, Filters: 16, Kernel: Square(1)}, {Kind: KindAct},
		{Kind: KindFork, Body: []Layer{
			{Kind: KindBranch, Body: []Layer{{Kind: KindConv, Filters: 64, Kernel: Square(1)}, {Kind: KindAct}}},
			{Kind: KindBranch, Body: []Layer{{Kind: KindConv, Filters: 64, Kernel: Square(3), Pad: Padding{Size: Square(1)}}, {Kind: KindAct}}},
		}},
	}}
}

func TestForkFire(t *testing.T) {
	r := Evaluate(fire())
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	// Table 1 of Iandola et al. 2016 lists 11,920 parameters for fire2
	// (value from memory): 96·16 + 16 + 16·64 + 64 + 16·9·64 + 64.
	if r.Totals.Params != 11920 {
		t.Errorf("fire2 has %d parameters, want 11,920", r.Totals.Params)
	}
	if r.Output != (Shape{128, 55, 55}) {
		t.Errorf("output %v, want 128×55×55", r.Output)
	}
	var paths []string
	for _, row := range r.Rows {
		paths = append(paths, row.Path.String())
	}
	if got := strings.Join(paths, " "); got != "1 2 3.1.1 3.1.2 3.2.1 3.2.2 3.join" {
		t.Errorf("paths %s", got)
	}
	join := r.Rows[len(r.Rows)-1]
	if join.Role != RoleJoin || join.In != (Shape{16, 55, 55}) || join.MACs != 0 {
		t.Errorf("join row %+v", join)
	}
	// The receptive field through branches is the widest path's (common
	// practice): the 3×3 branch sees 3×3.
	if join.RF != (FPair{3, 3}) {
		t.Errorf("receptive field %v, want 3×3 (the widest branch)", join.RF)
	}
}

func TestForkSplitAndIdentity(t *testing.T) {
	// A ShuffleNet V2 unit with stride 1 (Ma et al. 2018, Fig. 3c): split
	// the channels in half, keep one half, transform the other, join and
	// shuffle.
	s := &Stack{Input: Shape{116, 28, 28}, Layers: []Layer{
		{Kind: KindConv, Filters: 116, Kernel: Square(1)},
		{Kind: KindFork, Split: true, Body: []Layer{
			{Kind: KindBranch},
			{Kind: KindBranch, Body: []Layer{
				{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(1), NoBias: true},
				{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(3), Pad: Padding{Size: Square(1)}, Depthwise: true, NoBias: true},
				{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(1), NoBias: true},
			}},
		}},
		{Kind: KindShuffle, Groups: 2},
	}}
	r := Evaluate(s)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	if r.Output != (Shape{116, 28, 28}) {
		t.Errorf("output %v", r.Output)
	}
	// Branch 2 reads 58 channels: 58·58 + 58·9 + 58·58 weights.
	want := int64(116*116+116) + 58*58 + 58*9 + 58*58
	if r.Totals.Params != want {
		t.Errorf("params %d, want %d", r.Totals.Params, want)
	}
	// The split branch's first convolution keeps its input, a view of the
	// whole 116-channel map: autograd keeps that storage whole.
	var m Memory
	r.Memory(Training{Batch: 1}, DefaultAssumptions(), &m)
	if got, min := m.Rows[1], int64(116*28*28*4); got < min {
		t.Errorf("the split branch's convolution keeps %d bytes, want the whole %d-byte map", got, min)
	}
}

func TestForkDiagnostics(t *testing.T) {
	conv := func(f int64, k int64, s int64) Layer {
		return Layer{Kind: KindConv, Filters: f, Kernel: Square(k), Stride: Square(s)}
	}
	branch := func(ls ...Layer) Layer { return Layer{Kind: KindBranch, Body: ls} }
	cases := []struct {
		name   string
		layers []Layer
		code   Code
		sev    Severity
		text   string
	}{
		{"no branches", []Layer{{Kind: KindFork}}, ErrForkEmpty, SevError, "has no branches"},
		{"split does not divide", []Layer{{Kind: KindFork, Split: true, Body: []Layer{branch(), branch(), branch()}}}, ErrSplitWidth, SevError, "do not divide among 3"},
		{"sizes differ", []Layer{{Kind: KindFork, Body: []Layer{branch(conv(4, 1, 1)), branch(conv(4, 3, 2))}}}, ErrBranchShape, SevError, "branch 2 ends in 7×7 but branch 1 in 16×16"},
		{"one branch", []Layer{{Kind: KindFork, Body: []Layer{branch(conv(4, 1, 1))}}}, WarnForkOne, SevWarning, "joins nothing"},
		{"branch outside a fork", []Layer{branch(conv(4, 1, 1))}, ErrBranchPlace, SevError, "belongs directly inside a fork"},
		{"layer directly in a fork", []Layer{{Kind: KindFork, Body: []Layer{conv(4, 1, 1), branch()}}}, ErrBranchPlace, SevError, "holds branches only"},
		{"width rounds to 0", []Layer{{Kind: KindConv, Rel: Rel{Div: 8}, Kernel: Square(1)}}, ErrWidthZero, SevError, "gives 0 from an input of 5 channels"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r := Evaluate(&Stack{Input: Shape{5, 16, 16}, Layers: c.layers})
			for _, d := range r.Diags {
				if d.Code == c.code {
					if d.Severity != c.sev || !strings.Contains(d.Message(), c.text) {
						t.Errorf("%s %q, want %s containing %q", d.Severity, d.Message(), c.sev, c.text)
					}
					return
				}
			}
			t.Errorf("no diagnostic %d in %v", c.code, r.Diags)
		})
	}
}

// TestRelativeWidthsFollowRepeats checks that a body written once with
// relative widths resizes with each repeat's input: an inverted residual
// block (Sandler et al. 2018) whose first repeat widens 16 → 24.
func TestRelativeWidthsFollowRepeats(t *testing.T) {
	s := &Stack{Input: Shape{16, 32, 32}, Layers: []Layer{{Kind: KindBlock, Repeat: 2, Residual: true, IdentityOnly: true, Body: []Layer{
		{Kind: KindConv, Rel: Rel{Mul: 6}, Kernel: Square(1), NoBias: true},
		{Kind: KindConv, Rel: Rel{Mul: 6}, Kernel: Square(3), Pad: Padding{Size: Square(1)}, Depthwise: true, NoBias: true},
		{Kind: KindGate, Body: []Layer{
			{Kind: KindGlobalPool},
			{Kind: KindConv, Rel: Rel{Div: 4}, RelBlock: true, Kernel: Square(1)},
			{Kind: KindConv, Rel: Rel{Mul: 1}, Kernel: Square(1)},
		}},
		{Kind: KindConv, Filters: 24, Kernel: Square(1), NoBias: true},
	}}}}
	r := Evaluate(s)
	if r.Errors != 0 {
		t.Fatalf("errors: %v", r.Diags)
	}
	widths := map[string]int64{}
	for _, row := range r.Rows {
		widths[row.Path.String()] = row.Out.C
	}
	for path, want := range map[string]int64{
		"1.1.1": 96, "1.1.2": 96, "1.1.3.1.2": 4, "1.1.3.1.3": 96, // repeat 1 reads 16 channels
		"1.2.1": 144, "1.2.2": 144, "1.2.3.1.2": 6, "1.2.3.1.3": 144, // repeat 2 reads 24
	} {
		if widths[path] != want {
			t.Errorf("row %s has %d channels, want %d", path, widths[path], want)
		}
	}
}

func TestItemPath(t *testing.T) {
	s := fire()
	s.Layers = append(s.Layers, Layer{Kind: KindBlock, Repeat: 2, Body: []Layer{{Kind: KindAct}}})
	for _, c := range []struct {
		idx  []int
		want string
	}{
		{[]int{0}, "1"}, {[]int{2}, "3"}, {[]int{2, 1}, "3.2"}, {[]int{2, 1, 0}, "3.2.1"}, {[]int{3, 0}, "4.1.1"},
	} {
		if got := s.ItemPath(c.idx).String(); got != c.want {
			t.Errorf("ItemPath(%v) = %s, want %s", c.idx, got, c.want)
		}
	}
	if s.Levels([]int{2, 1, 0}) != 1 || s.Levels([]int{3, 0}) != 1 || s.Levels([]int{0}) != 0 {
		t.Errorf("levels %d %d %d", s.Levels([]int{2, 1, 0}), s.Levels([]int{3, 0}), s.Levels([]int{0}))
	}
}

// TestTooManyRowsStatesSize: a small file whose repeats expand past
// MaxRows is refused with the size it really expands to, not the limit
// plus one.
func TestTooManyRowsStatesSize(t *testing.T) {
	inner := Layer{Kind: KindBlock, Repeat: 1024, Body: []Layer{{Kind: KindAct}, {Kind: KindAct}}}
	s := &Stack{Input: Shape{C: 8, H: 8, W: 8}, Layers: []Layer{{Kind: KindBlock, Repeat: 1024, Body: []Layer{inner}}}}
	r := Evaluate(s)
	if r.Errors != 1 || len(r.Diags) != 1 || r.Diags[0].Code != ErrTooManyRows {
		t.Fatalf("diagnostics %v", r.Diags)
	}
	if msg := r.Diags[0].Message(); !strings.Contains(msg, "2097152 layers") {
		t.Errorf("message %q does not state the 1024·1024·2 = 2,097,152 rows", msg)
	}
}

// TestJoinWork checks the time estimate's work of a fork's join: an
// additive join of n branches does n − 1 additions per output element and
// reads every branch's output once (element-wise, as torch's add is); a
// concatenating join counts none, as before. The export writes the sum
// or the concatenation (PyTorch's + and torch.cat).
func TestJoinWork(t *testing.T) {
	b := func() Layer {
		return Layer{Kind: KindBranch, Body: []Layer{{Kind: KindConv, Filters: 4, Kernel: Square(1)}}}
	}
	for _, c := range []struct {
		add         bool
		flops, read float64
		expr        string
	}{
		{true, 2 * 4 * 8 * 8, 3 * 4 * 8 * 8, "b1 + b2 + b3"},
		{false, 0, 0, "torch.cat([b1, b2, b3], 1)"},
	} {
		fork := Layer{Kind: KindFork, JoinAdd: c.add, Body: []Layer{b(), b(), b()}}
		r := Evaluate(&Stack{Input: Shape{3, 8, 8}, Layers: []Layer{fork}})
		if r.Errors != 0 {
			t.Fatal(r.Diags)
		}
		w := rowWork(&r.Rows[len(r.Rows)-1])
		if w.FwdFLOPs != c.flops || w.FwdRead != c.read {
			t.Errorf("join add=%v: %g FLOPs reading %g values, want %g and %g", c.add, w.FwdFLOPs, w.FwdRead, c.flops, c.read)
		}
		if got := JoinExpr(&fork, []string{"b1", "b2", "b3"}); got != c.expr {
			t.Errorf("join add=%v: %q, want %q", c.add, got, c.expr)
		}
	}
}
