package engine

import (
	"errors"
	"strings"
	"testing"
)

// encoder is a small encoder: a 16-channel stem at 64×64 (conv, norm,
// act) and two downsampling stages (32 at 32×32, 64 at 16×16).
func encoder(t *testing.T) *Stack {
	t.Helper()
	s := &Stack{Input: Shape{3, 64, 64}, Layers: []Layer{
		{Kind: KindConv, Filters: 16, Kernel: Square(3), Pad: Padding{Size: Square(1)}, NoBias: true},
		{Kind: KindNorm},
		{Kind: KindAct},
	}}
	for range 2 {
		out, _, err := InsertStage(s, len(s.Layers)-1, StageOptions{Repeat: 1})
		if err != nil {
			t.Fatal(err)
		}
		s = out
	}
	return s
}

// TestInsertStageNames: every stage gets the first free name, so an
// up-stage can join it. Common practice: named stages (torchvision's
// layer1…layer4).
func TestInsertStageNames(t *testing.T) {
	s := encoder(t)
	if a, b := s.Layers[3].Name, s.Layers[4].Name; a != "down1" || b != "down2" {
		t.Errorf("stage names %q %q, want down1 down2", a, b)
	}
	s.Layers[0].Name = "down3" // taken by hand: skipped
	got, _, err := InsertStage(s, 4, StageOptions{})
	if err != nil || got.Layers[5].Name != "down4" {
		t.Errorf("third stage %q, %v; want down4", got.Layers[5].Name, err)
	}
}

// TestInsertUpStage: the decoder stage of U-Net (Ronneberger et al. 2015,
// Fig. 1): a 2×2 up-convolution with stride 2 that doubles the size and
// halves the channels, a concatenation with the encoder's map of that
// size, and 3×3 convolutions back to the halved width.
func TestInsertUpStage(t *testing.T) {
	tests := []struct {
		name     string
		stack    func(t *testing.T) *Stack
		opt      StageOptions
		joined   string // "" when nothing has the size
		renamed  int    // top-level index that got the name joined; −1: none
		out      Shape
		kinds    string // the up-stage's layers
		upstages int    // up-stages to insert, one after the other
	}{
		{"joins a stage", encoder, StageOptions{Repeat: 2}, "down1", -1, Shape{32, 32, 32},
			"deconv concat block", 1},
		{"names the stem it joins", encoder, StageOptions{Repeat: 2}, "skip1", 2, Shape{16, 64, 64},
			"deconv concat block", 2},
		{"upsample then conv", encoder, StageOptions{Repeat: 1, Up: UpResize}, "down1", -1, Shape{32, 32, 32},
			"upsample conv concat block", 1},
		{"no repeats: the joined width", encoder, StageOptions{}, "down1", -1, Shape{64, 32, 32},
			"deconv concat", 1},
		{"nothing of the size", func(*testing.T) *Stack { return &Stack{Input: Shape{8, 8, 8}} },
			StageOptions{Repeat: 1}, "", -1, Shape{4, 16, 16}, "deconv block", 1},
		{"one channel stays one", func(*testing.T) *Stack { return &Stack{Input: Shape{1, 8, 8}} },
			StageOptions{Repeat: 1}, "", -1, Shape{1, 16, 16}, "deconv block", 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := tt.stack(t)
			var info UpStage
			for range tt.upstages {
				before := len(s.Layers)
				out, up, err := InsertUpStage(s, len(s.Layers)-1, tt.opt)
				if err != nil {
					t.Fatal(err)
				}
				if len(s.Layers) != before || len(out.Layers) != before+1 {
					t.Fatalf("%d → %d items (input changed: %v)", before, len(out.Layers), len(s.Layers) != before)
				}
				s, info = out, up
			}
			r := Evaluate(s)
			if r.Errors != 0 {
				t.Fatalf("errors: %v", r.Diags)
			}
			if r.Output != tt.out || info.Out != tt.out {
				t.Errorf("output %v (reported %v), want %v", r.Output, info.Out, tt.out)
			}
			if info.Joined != tt.joined || info.Named != tt.renamed {
				t.Errorf("joined %q, renamed %d; want %q, %d", info.Joined, info.Named, tt.joined, tt.renamed)
			}
			if tt.renamed >= 0 && s.Layers[tt.renamed].Name != tt.joined {
				t.Errorf("item %d is named %q, want %q", tt.renamed+1, s.Layers[tt.renamed].Name, tt.joined)
			}
			last := s.Layers[len(s.Layers)-1]
			if want := "up" + string(rune('0'+tt.upstages)); last.Name != want || info.Name != want || last.Repeat != 1 {
				t.Errorf("up-stage %q (reported %q) ×%d, want %s ×1", last.Name, info.Name, last.Repeat, want)
			}
			var kinds []string
			for _, l := range last.Body {
				kinds = append(kinds, l.Kind.String())
			}
			if got := strings.Join(kinds, " "); got != tt.kinds {
				t.Errorf("layers %q, want %q", got, tt.kinds)
			}
			if b := last.Body[len(last.Body)-1]; b.Kind == KindBlock && b.Repeat != int64(tt.opt.Repeat) {
				t.Errorf("%d repeats, want %d", b.Repeat, tt.opt.Repeat)
			}
		})
	}
}

// TestInsertUpStageRefuses: a place or template that cannot be used is an
// ErrTransform naming it, as InsertStage's are.
func TestInsertUpStageRefuses(t *testing.T) {
	s := &Stack{Input: Shape{8, 8, 8}, Layers: []Layer{{Kind: KindConcat, From: "nowhere"}}}
	tests := []struct {
		after int
		opt   StageOptions
		want  string
	}{
		{5, StageOptions{}, "no layer 6"},
		{-2, StageOptions{}, "no layer -1"},
		{0, StageOptions{}, "has no known output"},
		{-1, StageOptions{Kernel: 4}, "kernel 4 must be odd"},
		{-1, StageOptions{Up: 7}, "up mode 7"},
		{-1, StageOptions{Repeat: 1, Norm: NormGroup, Groups: 3}, "groups do not divide"},
	}
	for _, tt := range tests {
		_, _, err := InsertUpStage(s, tt.after, tt.opt)
		if !errors.Is(err, ErrTransform) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("after %d %+v: %v; want %q", tt.after, tt.opt, err, tt.want)
		}
	}
}
