package engine

import (
	"fmt"
	"strings"
)

// Severity says whether a diagnostic stops the numbers (Error) or only
// flags a likely mistake (Warning).
type Severity uint8

// Severities.
const (
	SevWarning Severity = iota
	SevError
	SevInfo // a fact worth showing, such as how much a merge crops
)

// String returns "warning", "error" or "note".
func (s Severity) String() string {
	switch s {
	case SevError:
		return "error"
	case SevInfo:
		return "note"
	}
	return "warning"
}

// Code identifies a diagnostic; the message is built from the code and the
// numbers stored with it only when asked for, so evaluating a stack with
// diagnostics allocates nothing per layer.
type Code uint8

// Diagnostic codes.
const (
	ErrOutputSize      Code = iota + 1 // output size not positive
	ErrKernelTooLarge                  // effective kernel larger than the padded input
	ErrGroupsChannels                  // input channels not divisible by groups
	ErrGroupsFilters                   // filters not divisible by groups
	ErrDenseSpatial                    // dense layer on a spatial map
	ErrReshapeCount                    // reshape changes the element count
	ErrOverflow                        // a size or count does not fit in int64
	ErrPoolPad                         // pooling padding larger than half the window
	ErrOutPad                          // transposed output padding too large
	ErrSamePad                         // same padding where it is not defined
	ErrNormGroups                      // channels not divisible by norm groups
	ErrValue                           // a field is missing or out of range
	ErrNormSingle                      // instance norm over a single position
	ErrTooManyRows                     // repeats expand the stack past MaxRows
	ErrMergeUnknown                    // merge names no layer
	ErrMergeLater                      // merge names a layer that comes later
	ErrMergeShape                      // merged maps differ in height or width
	ErrAddChannels                     // added maps differ in channels
	ErrNameTwice                       // two layers share a name
	ErrProjection                      // a residual block's shortcut cannot be built
	ErrNesting                         // blocks nested deeper than MaxBlockDepth
	WarnStrideDrop                     // floor division leaves input rows/columns unused
	WarnSameAsym                       // same padding needs one extra row/column on one side
	WarnFinalRF                        // final receptive field smaller than the input
	WarnParamShare                     // one layer holds over half of all parameters
	WarnChannels8                      // channel count not a multiple of 8
	WarnMergeJump                      // merged maps have different effective strides
	InfoCrop                           // a merge center-crops a map
	ErrGateShape                       // a gate body does not end in C×1×1
	ErrDenseShape                      // a densely linked repeat changes the map size
	ErrShuffleGroups                   // channels not divisible by shuffle groups
	ErrWidthZero                       // a relative width resolves to no channels
	ErrForkEmpty                       // a fork without branches
	ErrSplitWidth                      // channels not divisible among a split fork's branches
	ErrBranchShape                     // a fork's branches end in different map sizes
	ErrBranchPlace                     // a branch outside a fork, or another item directly in one
	WarnForkOne                        // a fork with a single branch joins nothing
	ErrToSpaceChannels                 // channels not a multiple of the to-space factor squared
	ErrToChannelsSize                  // height or width not a multiple of the to-channels factor
	ErrKeepChannels                    // keep asks for more channels than the input has
	ErrJoinShape                       // an additive fork's branches end in different shapes
	ErrBranchFrom                      // a branch starts from a name no earlier output has
	ErrBranchFromSplit                 // a branch of a split fork starts from a named output
	ErrGroupWidth                      // input channels not a multiple of the group width
	ErrGateKernel                      // a spatial gate's kernel is even
	WarnUnitUnused                     // a unit no layer uses
)

// codeNames are the diagnostics' stable names: the words a stack file's
// quiet: list and the reports use. A name never changes once given, so a
// file that silences a warning keeps doing so.
var codeNames = [...]string{
	ErrOutputSize:      "output-size",
	ErrKernelTooLarge:  "kernel-too-large",
	ErrGroupsChannels:  "groups-channels",
	ErrGroupsFilters:   "groups-filters",
	ErrDenseSpatial:    "dense-on-map",
	ErrReshapeCount:    "reshape-count",
	ErrOverflow:        "overflow",
	ErrPoolPad:         "pool-padding",
	ErrOutPad:          "output-padding",
	ErrSamePad:         "same-padding",
	ErrNormGroups:      "norm-groups",
	ErrValue:           "value-range",
	ErrNormSingle:      "norm-single-position",
	ErrTooManyRows:     "too-many-rows",
	ErrMergeUnknown:    "merge-unknown",
	ErrMergeLater:      "merge-later",
	ErrMergeShape:      "merge-size",
	ErrAddChannels:     "add-channels",
	ErrNameTwice:       "name-twice",
	ErrProjection:      "shortcut-impossible",
	ErrNesting:         "nesting-depth",
	WarnStrideDrop:     "stride-drops-edge",
	WarnSameAsym:       "same-padding-uneven",
	WarnFinalRF:        "small-receptive-field",
	WarnParamShare:     "parameter-heavy-layer",
	WarnChannels8:      "channels-not-multiple-of-8",
	WarnMergeJump:      "merge-stride-mismatch",
	InfoCrop:           "merge-crop",
	ErrGateShape:       "gate-shape",
	ErrDenseShape:      "dense-link-size",
	ErrShuffleGroups:   "shuffle-groups",
	ErrWidthZero:       "width-zero",
	ErrForkEmpty:       "fork-empty",
	ErrSplitWidth:      "split-width",
	ErrBranchShape:     "branch-size",
	ErrBranchPlace:     "branch-place",
	WarnForkOne:        "fork-one-branch",
	ErrToSpaceChannels: "to-space-channels",
	ErrToChannelsSize:  "to-channels-size",
	ErrKeepChannels:    "keep-channels",
	ErrJoinShape:       "join-add-shape",
	ErrBranchFrom:      "branch-from-unknown",
	ErrBranchFromSplit: "branch-from-split",
	ErrGroupWidth:      "group-width",
	ErrGateKernel:      "spatial-gate-kernel",
	WarnUnitUnused:     "unit-unused",
}

// Name returns the code's stable name, e.g. "small-receptive-field"; ""
// for an unknown code.
func (c Code) Name() string {
	if int(c) < len(codeNames) {
		return codeNames[c]
	}
	return ""
}

// warningCodes are the codes whose diagnostics are warnings.
var warningCodes = []Code{WarnStrideDrop, WarnSameAsym, WarnFinalRF, WarnParamShare, WarnChannels8, WarnMergeJump, WarnForkOne, WarnUnitUnused}

// WarningNames lists the names of every warning, the ones a stack may
// silence, in code order.
func WarningNames() []string {
	out := make([]string, len(warningCodes))
	for i, c := range warningCodes {
		out[i] = c.Name()
	}
	return out
}

// WarningByName returns the warning code named name (exactly as
// WarningNames spells it).
func WarningByName(name string) (Code, bool) {
	for _, c := range warningCodes {
		if c.Name() == name {
			return c, true
		}
	}
	return 0, false
}

// Diagnostic is one problem found in a stack, tied to a row of the result.
// Name carries a layer name the message needs (merges).
type Diagnostic struct {
	Name     string
	Severity Severity
	Code     Code
	Row      int    // index into Result.Rows
	Field    string // the stack-file field at fault, e.g. "kernel"
	Axis     byte   // 'h', 'w' or 'b' (both) for per-axis problems, else 0
	// Hint is what the message offers in place of a misspelt word (a
	// merge's likely target); "" when nothing is close.
	Hint string
	// The numbers involved; their meaning depends on Code.
	A, B, C, D, E int64
}

func axisName(a byte, rows bool) string {
	switch {
	case a == 'b' && rows:
		return "rows and columns"
	case a == 'b':
		return "height and width"
	case a == 'h' && rows:
		return "rows"
	case a == 'w' && rows:
		return "columns"
	case a == 'h':
		return "height"
	case a == 'w':
		return "width"
	}
	return "size"
}

func plural(n int64, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// Message returns a one-line description that states the numbers involved
// and how to fix the problem. It does not name the layer; see Result.Describe.
func (d Diagnostic) Message() string {
	ax := axisName(d.Axis, false)
	switch d.Code {
	case ErrOutputSize:
		return fmt.Sprintf("output %s would be %d from input %s %d; lower the %s or padding, or raise the input", ax, d.A, ax, d.B, d.Field)
	case ErrKernelTooLarge:
		return fmt.Sprintf("kernel %s spans %d pixels but the padded input %s is only %d; use a smaller kernel or dilation, or add padding", ax, d.A, ax, d.B)
	case ErrGroupsChannels:
		return fmt.Sprintf("input channels %d are not divisible by groups %d; pick groups that divide %d", d.A, d.B, d.A)
	case ErrGroupWidth:
		return fmt.Sprintf("input channels %d are not a multiple of group-width %d (groups = input channels / group width); pick a group width that divides %d, e.g. %d, or write groups instead", d.A, d.B, d.A, gcd(d.A, d.B))
	case ErrGroupsFilters:
		return fmt.Sprintf("filters %d are not divisible by groups %d; use a multiple of %d", d.A, d.B, d.B)
	case ErrDenseSpatial:
		return fmt.Sprintf("dense layer reached by a spatial map %d×%d×%d; insert flatten or global-pool before it, or add per-position: true to apply it at every position", d.A, d.B, d.C)
	case ErrReshapeCount:
		return fmt.Sprintf("reshape target holds %d elements but the input holds %d; make C·H·W equal %d", d.A, d.B, d.B)
	case ErrOverflow:
		return fmt.Sprintf("%s does not fit in a 64-bit count; the sizes are too large", d.Field)
	case ErrPoolPad:
		return fmt.Sprintf("padding %d is more than half the window %d on the %s; use padding ≤ %d", d.A, d.B, ax, d.B/2)
	case ErrOutPad:
		return fmt.Sprintf("output padding %d on the %s must be smaller than the stride (%d) or the dilation (%d)", d.A, ax, d.B, d.C)
	case ErrSamePad:
		return fmt.Sprintf("padding \"same\" is not defined for %s; give the padding as a number", d.Field)
	case ErrNormGroups:
		return fmt.Sprintf("channels %d are not divisible by norm groups %d; pick groups that divide %d", d.A, d.B, d.A)
	case ErrNormSingle:
		return "instance norm over a 1×1 map has a single value per channel to normalise; use it before global pooling, or use batch norm"
	case ErrTooManyRows:
		return fmt.Sprintf("the repeats expand the stack to %d layers; the limit is %d — lower a repeat count", d.A, d.B)
	case ErrMergeUnknown:
		if d.Hint != "" {
			return fmt.Sprintf("no earlier layer or block is named %q; did you mean %q?", d.Name, d.Hint)
		}
		return fmt.Sprintf("no layer or block is named %q; name the layer to merge with name: %s", d.Name, d.Name)
	case ErrMergeLater:
		return fmt.Sprintf("%q comes later in the stack; a merge can only use an earlier output", d.Name)
	case ErrMergeShape:
		return fmt.Sprintf("%s is %d×%d but the map here is %d×%d; add crop: true to center-crop the larger one, or change the sizes", mergeWhat(d.Name), d.A, d.B, d.C, d.D)
	case ErrAddChannels:
		return fmt.Sprintf("%s has %d channels but the map here has %d; an addition needs equal channels (concat joins different ones)", mergeWhat(d.Name), d.A, d.B)
	case ErrNameTwice:
		return fmt.Sprintf("name %q is already used by layer %s; names must be unique", d.Name, d.Field)
	case ErrProjection:
		return fmt.Sprintf("the block's output %d×%d is larger than its input %d×%d, so no strided 1×1 shortcut fits; remove residual or keep the size", d.A, d.B, d.C, d.D)
	case WarnMergeJump:
		return fmt.Sprintf("%s has an effective stride of %g input pixels, the map here %g; the merged positions do not line up", mergeWhat(d.Name), float64(d.A)/1e6, float64(d.B)/1e6)
	case InfoCrop:
		return fmt.Sprintf("center-crops %s from %d×%d to %d×%d (%d rows and %d columns removed, split between the two sides)", cropWhat(d.Field, d.Name), d.A, d.B, d.C, d.D, d.A-d.C, d.B-d.D)
	case ErrNesting:
		return fmt.Sprintf("blocks nest more than %d deep here; flatten an inner block", MaxBlockDepth)
	case ErrDenseShape:
		return fmt.Sprintf("the repeat's output is %d×%d but its input %d×%d; dense links join maps of one size — keep the strides in the block at 1 and downsample between dense blocks", d.A, d.B, d.C, d.D)
	case ErrGateShape:
		return fmt.Sprintf("the gate's layers end in %d×%d×%d, but a channel gate for this %d-channel map must end in %d×1×1; end them with global-pool and a 1×1 conv of %d filters", d.A, d.B, d.C, d.D, d.D, d.D)
	case ErrShuffleGroups:
		return fmt.Sprintf("channels %d are not divisible by shuffle groups %d; pick groups that divide %d, or make the layer before give a multiple of %d", d.A, d.B, d.A, d.B)
	case ErrWidthZero:
		return fmt.Sprintf("the relative %s gives %d from an input of %d channels; use a larger factor, a smaller divisor, round: 8, or an absolute width", d.Field, d.B, d.A)
	case ErrForkEmpty:
		return "the fork has no branches; add one under branches: (an empty one, [], passes the map on unchanged)"
	case ErrSplitWidth:
		return fmt.Sprintf("channels %d do not divide among %d branches; split needs a multiple of %d channels, or use input: copy", d.A, d.B, d.B)
	case ErrBranchShape:
		return fmt.Sprintf("branch %d ends in %d×%d but branch 1 in %d×%d; the branches are joined along the channels, so make their strides and padding agree", d.E, d.A, d.B, d.C, d.D)
	case ErrBranchPlace:
		if d.Field == "branch" {
			return "a branch belongs directly inside a fork; wrap it in a fork, or take its layers out"
		}
		return "a fork holds branches only; put this item inside a branch (a list under branches:)"
	case ErrToSpaceChannels:
		return fmt.Sprintf("channels %d are not a multiple of factor² = %d (factor %d); give the layer before a multiple of %d channels, e.g. %d, or pick a factor whose square divides %d",
			d.A, d.B, d.C, d.B, d.D, d.A)
	case ErrToChannelsSize:
		return fmt.Sprintf("input %s %d is not a multiple of factor %d; make it a multiple of %d, e.g. %d (padding or cropping the layers before), or pick a factor that divides %d",
			ax, d.A, d.B, d.B, d.C, d.A)
	case ErrKeepChannels:
		return fmt.Sprintf("channels %d is more than the %d input channels; keep at most %d, or widen the layer before to %d", d.A, d.B, d.B, d.A)
	case WarnForkOne:
		return "the fork has one branch, so it joins nothing; add a branch (an empty one passes the map on), or drop the fork"
	case ErrJoinShape:
		if d.Field == "channels" {
			return fmt.Sprintf("branch %d ends in %d channels but branch 1 in %d; join: add sums the branches, so their channels must be equal — end the branch with a 1×1 conv of %d filters, or use join: concat", d.E, d.A, d.B, d.B)
		}
		return fmt.Sprintf("branch %d ends in %d×%d but branch 1 in %d×%d; join: add sums the branches, so their sizes must be equal — make their strides agree, or pool or upsample one of them", d.E, d.A, d.B, d.C, d.D)
	case ErrBranchFrom:
		switch {
		case d.Hint != "":
			return fmt.Sprintf("branch %d starts from %q, but no earlier layer or block has that name; did you mean %q?", d.E, d.Name, d.Hint)
		case d.A == 1:
			return fmt.Sprintf("branch %d starts from %q, which comes later in the stack; a branch can only start from an earlier output", d.E, d.Name)
		}
		return fmt.Sprintf("branch %d starts from %q, but no layer or block has that name; name the output it should read with name: %s", d.E, d.Name, d.Name)
	case ErrBranchFromSplit:
		return fmt.Sprintf("branch %d starts from %q, but a split fork's branches each read their share of the fork's input; use input: copy, or drop from:", d.E, d.Name)
	case WarnUnitUnused:
		return fmt.Sprintf("unit %s is defined but no layer uses it; add a use ({unit: %s, …}) or remove it from units:", d.Name, d.Name)
	case ErrGateKernel:
		return fmt.Sprintf("kernel %d is even; the spatial gate pads (k − 1)/2 on each side to keep the map's size, which needs an odd kernel: use %d or %d", d.A, d.A-1, d.A+1)
	case ErrValue:
		return fmt.Sprintf("%s is %d; it must be at least %d", d.Field, d.A, d.B)
	case WarnStrideDrop:
		return fmt.Sprintf("stride %d leaves the last %d input %s unused ((%d + 2·%d − %d) mod %d = %d); adjust padding or input size",
			d.A, d.B, plural(d.B, strings.ReplaceAll(axisName(d.Axis, true), "s", ""), axisName(d.Axis, true)), d.C, d.D, d.E, d.A, d.B)
	case WarnSameAsym:
		return fmt.Sprintf("padding \"same\" needs %d padding %s, split unevenly (%d before, %d after); frameworks without asymmetric padding differ", d.A, axisName(d.Axis, true), d.A/2, d.A-d.A/2)
	case WarnFinalRF:
		return fmt.Sprintf("final receptive field %d×%d is smaller than the input %d×%d; outputs see only part of the image", d.A, d.B, d.C, d.D)
	case WarnParamShare:
		return fmt.Sprintf("holds %s of the stack's %s parameters (%d%%); consider global pooling before a dense layer, fewer dense outputs or a narrower layer", GroupDigits(d.A), GroupDigits(d.B), d.C)
	case WarnChannels8:
		return fmt.Sprintf("%s %d is not a multiple of 8 (common practice for tensor-core efficiency); try %d", d.Field, d.A, d.B)
	}
	return "unknown problem"
}

// mergeWhat names the other input of a merge in messages.
func mergeWhat(name string) string {
	if name == "" {
		return "the shortcut"
	}
	return fmt.Sprintf("%q", name)
}

// cropWhat names the map a merge crops.
func cropWhat(which, name string) string {
	if which == "here" {
		return "the map here"
	}
	return mergeWhat(name)
}
