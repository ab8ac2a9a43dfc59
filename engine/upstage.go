package engine

import (
	"fmt"
	"strconv"
)

// Stage names: InsertStage names its block DownStagePrefix and a number,
// InsertUpStage UpStagePrefix and a number, and a layer an up-stage joins
// that had no name gets SkipPrefix and a number.
const (
	DownStagePrefix = "down"
	UpStagePrefix   = "up"
	SkipPrefix      = "skip"
)

// UpMode says how an up-stage doubles the size.
type UpMode uint8

// Up modes.
const (
	UpDeconv UpMode = iota // a 2×2 transposed convolution with stride 2
	UpResize               // nearest ×2 upsampling, then a k×k convolution
)

var upNames = [...]string{"deconv", "upsample"}

// String returns the stage-file value.
func (u UpMode) String() string {
	if int(u) < len(upNames) {
		return upNames[u]
	}
	return "invalid"
}

// FreeName returns prefix followed by the smallest number from 1 that no
// layer of s (bodies included) is named.
func FreeName(s *Stack, prefix string) string {
	for n := 1; ; n++ {
		name := prefix + strconv.Itoa(n)
		if !hasName(s.Layers, name) {
			return name
		}
	}
}

// UpStage tells what InsertUpStage did.
type UpStage struct {
	Name   string // the up-stage block's name
	Out    Shape  // its output
	Joined string // the name of the earlier item it joins; "" when none has its size
	Named  int    // the top-level index of the item that got the name Joined; −1 when none was renamed
}

// InsertUpStage returns a copy of s with an up-stage inserted after
// top-level item after (−1 inserts at the start), as one named block
// (UpStagePrefix and the first free number): the mirror of InsertStage,
// the decoder stage of U-Net (Ronneberger et al. 2015). Its layers:
//
//   - the upsampling, which doubles the height and width and halves the
//     channels (never below 1): with UpDeconv a 2×2 transposed
//     convolution with stride 2 (U-Net's "up-convolution"), with UpResize
//     nearest ×2 upsampling and a k×k convolution with padding k/2. No
//     norm follows it, so it has a bias;
//   - a concat of the nearest earlier top-level item whose output has the
//     doubled height and width — the encoder stage of that size; an item
//     without a name is given SkipPrefix and the first free number. When
//     no earlier item has that size there is no concat;
//   - when opt.Repeat > 0, a block of opt.Repeat repeats of the stage
//     template (a k×k convolution with padding k/2 at the halved width, the
//     norm and the activation of opt), which brings the joined map back to
//     the halved width.
//
// opt.Cap does not apply: an up-stage narrows.
func InsertUpStage(s *Stack, after int, opt StageOptions) (*Stack, UpStage, error) {
	k, in, err := stageInput(s, after, opt)
	if err != nil {
		return nil, UpStage{}, err
	}
	if int(opt.Up) >= len(upNames) {
		return nil, UpStage{}, fmt.Errorf("%w: up mode %d is not valid", ErrTransform, opt.Up)
	}
	if in.H < 1 || in.W < 1 {
		return nil, UpStage{}, fmt.Errorf("%w: a %d×%d map cannot be doubled", ErrTransform, in.H, in.W)
	}
	c := max(in.C/2, 1)
	target := Shape{C: c, H: 2 * in.H, W: 2 * in.W}
	var body []Layer
	if opt.Up == UpResize {
		body = []Layer{
			{Kind: KindUpsample, Factor: Square(2)},
			{Kind: KindConv, Filters: c, Kernel: Square(k), Pad: Padding{Size: Square(k / 2)}},
		}
	} else {
		body = []Layer{{Kind: KindDeconv, Filters: c, Kernel: Square(2), Stride: Square(2)}}
	}
	out := s.Clone()
	info := UpStage{Named: -1}
	if j := sameSize(s, after, target); j >= 0 {
		info.Joined = out.Layers[j].Name
		if info.Joined == "" {
			info.Joined = FreeName(s, SkipPrefix)
			out.Layers[j].Name = info.Joined
			info.Named = j
		}
		body = append(body, Layer{Kind: KindConcat, From: info.Joined})
	}
	if opt.Repeat > 0 {
		conv := Layer{Kind: KindConv, Filters: c, Kernel: Square(k), Pad: Padding{Size: Square(k / 2)},
			NoBias: !opt.Bias.Or(opt.NoNorm)}
		rep, err := stageBody(conv, opt)
		if err != nil {
			return nil, UpStage{}, err
		}
		body = append(body, Layer{Kind: KindBlock, Repeat: int64(opt.Repeat), Body: rep})
	}
	info.Name = FreeName(out, UpStagePrefix)
	block := Layer{Kind: KindBlock, Name: info.Name, Repeat: 1, Body: body}
	out.Layers = append(out.Layers[:after+1:after+1], append([]Layer{block}, out.Layers[after+1:]...)...)
	r := Evaluate(&Stack{Input: out.Input, Layers: out.Layers[:after+2]})
	info.Out = r.Output
	return out, info, nil
}

// sameSize returns the last top-level item at or before after whose
// output has target's height and width, or −1.
func sameSize(s *Stack, after int, target Shape) int {
	for j := after; j >= 0; j-- {
		r := Evaluate(&Stack{Input: s.Input, Layers: s.Layers[:j+1]})
		if r.Errors == 0 && r.Output.H == target.H && r.Output.W == target.W {
			return j
		}
	}
	return -1
}
