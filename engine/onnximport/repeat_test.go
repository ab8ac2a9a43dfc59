package onnximport

import (
	"fmt"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/onnximport/onnxpb"
)

// inverted builds a stem and inverted residual units (Sandler et al. 2018,
// MobileNetV2, Fig. 3b and Table 2: a 1×1 expansion by t, a 3×3
// depthwise convolution carrying the stride, a linear 1×1 projection;
// the input is added only where stride and width are kept). Each unit is
// {in, t·in, out, stride}; unit n's nodes are under /features/features.n/.
func inverted(t testing.TB, units [][4]int64) []byte {
	w := map[string][]int64{"w0": {8, 3, 3, 3}}
	nodes := []*onnxpb.Node{node("Conv", "/features/features.0/Conv", []string{"x", "w0"}, "t0", ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1))}
	cur := "t0"
	for i, u := range units {
		n := i + 1
		p := fmt.Sprintf("/features/features.%d/", n)
		id := func(s string) string { return fmt.Sprintf("u%d%s", n, s) }
		w[id("e")], w[id("d")], w[id("p")] = []int64{u[1], u[0], 1, 1}, []int64{u[1], 1, 3, 3}, []int64{u[2], u[1], 1, 1}
		nodes = append(nodes,
			node("Conv", p+"expand/Conv", []string{cur, id("e")}, id("c1"), ints("kernel_shape", 1, 1)),
			node("Relu", p+"relu1/Relu", []string{id("c1")}, id("r1")),
			node("Conv", p+"dw/Conv", []string{id("r1"), id("d")}, id("c2"), ints("kernel_shape", 3, 3), ints("pads", 1, 1, 1, 1),
				ints("strides", u[3], u[3]), &onnxpb.Attribute{Name: ptr("group"), Kind: ptr(int32(2)), I: ptr(u[1])}),
			node("Relu", p+"relu2/Relu", []string{id("c2")}, id("r2")),
			node("Conv", p+"project/Conv", []string{id("r2"), id("p")}, id("c3"), ints("kernel_shape", 1, 1)),
		)
		out := id("c3")
		if u[0] == u[2] && u[3] == 1 {
			nodes = append(nodes, node("Add", p+"Add", []string{cur, out}, id("y")))
			out = id("y")
		}
		cur = out
	}
	nodes[len(nodes)-1].Output = []string{"y"}
	return model(t, [4]int64{1, 3, 16, 16}, 13, w, nodes...)
}

func ptr[T any](v T) *T { return &v }

// top lists a stack's top-level kinds and repeats, as "conv block×3".
func top(ls []engine.Layer) string {
	var sb strings.Builder
	for _, l := range ls {
		sb.WriteString(l.Kind.String())
		if l.Kind == engine.KindBlock {
			fmt.Fprintf(&sb, "×%d", max(l.Repeat, 1))
		}
		sb.WriteByte(' ')
	}
	return strings.TrimSpace(sb.String())
}

// TestFoldInvertedStage: a stage whose first unit strides and widens
// (8 → 16, no addition) and whose later units add their input is one
// block of 3 with an identity-only residual, written as its first repeat
// with the expansion x6 of each repeat's input and the depthwise
// convolution as wide as its own input (x1, relative-to: input) (Sandler
// et al. 2018, Table 2: t = 6, n = 3, s = 2).
func TestFoldInvertedStage(t *testing.T) {
	s, _, err := Import(inverted(t, [][4]int64{{8, 48, 16, 2}, {16, 96, 16, 1}, {16, 96, 16, 1}}), "mb")
	if err != nil {
		t.Fatal(err)
	}
	if got := top(s.Layers); got != "conv block×3" {
		t.Fatalf("top level %q, want conv block×3", got)
	}
	b := s.Layers[1]
	if !b.Residual || !b.IdentityOnly || b.AllStrides || b.Name != "features-1-3" || len(b.Body) != 5 {
		t.Fatalf("block %+v", b)
	}
	e, d, p := b.Body[0], b.Body[2], b.Body[4]
	if e.Rel != (engine.Rel{Mul: 6}) || d.Rel != (engine.Rel{Mul: 1}) || !d.RelInput || !d.Depthwise || d.Stride != engine.Square(2) || !p.Rel.IsZero() || p.Filters != 16 {
		t.Errorf("expand %v, depthwise %v of input %v groups %d dw %v stride %v, project %d %v", e.Rel, d.Rel, d.RelInput, d.Groups, d.Depthwise, d.Stride, p.Filters, p.Rel)
	}
	// The folded stack counts what the graph holds: 3·3·3·8 for the stem,
	// then per unit in·6in + 9·6in + 6in·out.
	want := int64(3*3*3*8) + (8*48 + 9*48 + 48*16) + 2*(16*96+9*96+96*16)
	if r := engine.Evaluate(s); r.Errors != 0 || r.Totals.Params != want {
		t.Errorf("params %d, want %d: %v", r.Totals.Params, want, r.Diags)
	}
}

// TestFoldNeedsOneWidthRule: when no single rule (absolute, xK, /D, with
// or without round: 8, of the body or the block) gives every repeat's
// width, the first unit is not folded in (8 → 40 is x5, 16 → 96 is x6);
// the two identical residual units still make one block of 2, and the
// one-unit stage read from features.1 becomes a block of one repeat, as
// a person writes it (common practice in the stack file's MobileNet
// stages).
func TestFoldNeedsOneWidthRule(t *testing.T) {
	s, _, err := Import(inverted(t, [][4]int64{{8, 40, 16, 2}, {16, 96, 16, 1}, {16, 96, 16, 1}}), "mb")
	if err != nil {
		t.Fatal(err)
	}
	if got := top(s.Layers); got != "conv block×1 block×2" {
		t.Fatalf("top level %q, want conv block×1 block×2", got)
	}
	if s.Layers[1].Name != "features-1" || s.Layers[2].Name != "features-2-3" || s.Layers[1].Residual || s.Layers[2].IdentityOnly {
		t.Errorf("names %q %q, residual %v, identity-only %v", s.Layers[1].Name, s.Layers[2].Name, s.Layers[1].Residual, s.Layers[2].IdentityOnly)
	}
	if c := s.Layers[2].Body[0]; !c.Rel.IsZero() || c.Filters != 96 {
		t.Errorf("equal widths stay absolute: %d %v", c.Filters, c.Rel)
	}
}

// TestSameRowsCatchesAChange: the self-check compares every
// convolution's shapes, parameters and MACs with the unfolded stack's
// and refuses a stack where one width differs (common practice: a
// rewrite must not change what the network computes).
func TestSameRowsCatchesAChange(t *testing.T) {
	s, _, err := Import(inverted(t, [][4]int64{{8, 48, 16, 2}, {16, 96, 16, 1}}), "mb")
	if err != nil {
		t.Fatal(err)
	}
	items := []*item{
		{l: engine.Layer{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3)}},
		{l: engine.Layer{Kind: engine.KindAct, Act: engine.ActReLU}},
	}
	f := newFolder(s, items)
	same := []engine.Layer{items[0].l, items[1].l}
	if !f.sameRows(s, same) {
		t.Error("the unfolded stack differs from itself")
	}
	wider := []engine.Layer{items[0].l, items[1].l}
	wider[0].Filters = 9
	if f.sameRows(s, wider) {
		t.Error("a wider convolution passed the check")
	}
}

// TestSanitiseModulePath: module paths become names within the stack
// file's rules (letters, digits, '_', '-', a letter first, at most
// engine.MaxNameLen characters with room for a unique suffix), dots as
// '-', and a long path ends at a whole word.
func TestSanitiseModulePath(t *testing.T) {
	for in, want := range map[string]string{
		"features.1":  "features-1",
		"layer1":      "layer1",
		"0.conv":      "conv",
		"block::proj": "block_proj",
		"stages.2.blocks.10.attention.qkv.weights": "stages-2-blocks-10-attention",
	} {
		got := sanitise(in)
		if got != want {
			t.Errorf("sanitise(%q) = %q, want %q", in, got, want)
		}
		if len(got) > engine.MaxNameLen-4 {
			t.Errorf("sanitise(%q) is %d long", in, len(got))
		}
	}
}
