package engine

// Spec describes one layer kind completely: its stack-file key and main
// value, its fields, and its rules (output shape, parameters and buffers,
// MACs, receptive field, the bytes it keeps for the backward pass, its
// explanation and its PyTorch form). The stack-file loader and saver, the
// editor's forms, quick entry, the one-line summary, the explanation
// panel, the memory model and the export all read this description; none
// of them switches on the kind.
type Spec struct {
	Kind Kind
	Key  string // stack-file key and quick-entry word, e.g. "conv"
	Help string // what the kind does, in a few words (pickers, help screens)
	// Example is a quick-entry line of a typical layer of the kind.
	Example string
	// Main is the kind's main value, written as the value of its key
	// ("conv: 64"); nil when the kind takes none.
	Main *Param
	// Params are the kind's other fields, in the order forms show them,
	// the stack file writes them and the summary line lists them.
	Params []Param
	// Bare kinds may be written as a bare word in a stack file ("-
	// flatten"); the main value then takes its default.
	Bare bool
	// Body kinds hold a list of layers under "layers:" (blocks).
	Body bool
	// Branches kinds (forks) hold their body under "branches:", one list
	// of layers per branch; each is a KindBranch item.
	Branches bool
	// Weighted kinds carry a weight matrix whose width the user picks.
	Weighted bool
	// Merge kinds combine the flow with a named earlier output.
	Merge bool
	// View kinds reinterpret their input's storage instead of writing a
	// new tensor (flatten, reshape).
	View bool

	// keepLayout: the output is stored as the input is, channels-last or
	// not (PyTorch's CPU convolutions, norms and element-wise functions
	// keep the layout; measured with testdata/reference); other kinds
	// write a fresh contiguous tensor unless their eval says it is
	// channels-last (layer norm and per-position dense, as the export
	// writes them). A per-position dense layer copies an input that is not
	// channels-last, and autograd then keeps the copy.
	keepLayout bool

	eval    func(c *calc, f *flow)
	explain func(row *Row) []string
	saved   func(row *Row, s *saving) int64
	torch   func(row *Row) Torch
	// work is the kind's FLOP and byte rule for the time estimate (roofline.go);
	// nil: element-wise (elementWork), or no work for views and containers.
	work func(row *Row) Work
}

// Torch is how the PyTorch export writes one row: a module built in
// __init__ and called on x in forward (Module), or an expression of x
// assigned to x in forward (Expr). Pad, when set, is a padding module
// applied before Module (asymmetric "same" padding). A merge's Expr uses
// OtherVar for the second input.
type Torch struct {
	Module string
	Expr   string
	Pad    string
}

// OtherVar stands for the merged output's variable in a Torch expression.
const OtherVar = "{other}"

// specs holds every kind's description, indexed by Kind; filled once at
// start-up and never changed.
var specs [kindCount]*Spec

func init() {
	for _, s := range []*Spec{&convSpec, &deconvSpec, &poolSpec, &globalPoolSpec, &poolToSpec,
		&upsampleSpec, &normSpec, &actSpec, &dropoutSpec, &flattenSpec, &denseSpec,
		&reshapeSpec, &blockSpec, &concatSpec, &addSpec, &gateSpec,
		&scaleSpec, &shuffleSpec, &forkSpec, &branchSpec,
		&toSpaceSpec, &toChannelsSpec, &keepSpec, &spatialGateSpec} {
		specs[s.Kind] = s
	}
}

// SpecOf returns the description of kind k (an empty one for an invalid
// kind).
func SpecOf(k Kind) *Spec {
	if k < kindCount && specs[k] != nil {
		return specs[k]
	}
	return &invalidSpec
}

var invalidSpec = Spec{Key: "invalid"}

// explainRow returns the kind's arithmetic lines for an evaluated row.
func (s *Spec) explainRow(row *Row) []string {
	if s.explain == nil {
		return nil
	}
	return s.explain(row)
}

// Torch returns the PyTorch form of an evaluated row; ok is false for a
// kind the export cannot write.
func (s *Spec) Torch(row *Row) (t Torch, ok bool) {
	if s.torch == nil {
		return Torch{}, false
	}
	return s.torch(row), true
}
