package editor

import (
	"errors"
	"fmt"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// change applies fn to the stack as one undoable step, then recomputes
// every number. fn may move the cursor by returning the address to select.
//
// Changes are copy-on-write: fn edits a fresh copy, and the stack it
// replaces goes to the history untouched, so the background width search
// can read the current stack while later changes are made.
func (m *Model) change(what string, fn func(s *engine.Stack) (addr, error)) tea.Cmd {
	before := snapshot{stack: m.stack, cursor: m.tree.cursor, what: what}
	next := m.stack.Clone()
	sel, err := fn(next)
	if err == nil {
		err = expandUses(next)
	}
	if err != nil {
		m.setStatus(err.Error(), statusError)
		return nil
	}
	// The journal writes the stack file's form after every change; a
	// change past the size a stack file may have is refused here, so the
	// editor never holds what it could not save.
	wasUnprotected := m.file.unprotected
	recErr := m.recordStack(next)
	if errors.Is(recErr, stackfile.ErrTooLarge) {
		m.file.unprotected = wasUnprotected // the journal still holds the stack before
		m.setStatus("refused: "+recErr.Error(), statusError)
		return nil
	}
	m.stack = next
	m.hist.push(before, next)
	m.file.dirty = true
	m.tree.anchor = -1
	m.recompute()
	if sel != nil {
		m.tree.selectAddr(sel, m.stack, &m.nums.res)
	}
	if err := recErr; err != nil {
		m.setStatus(what+" — but no recovery copy could be written ("+err.Error()+"); save soon", statusError)
		return m.widthCmd()
	}
	m.setStatus(what, statusInfo)
	return m.widthCmd()
}

// record writes the journal. A failure never stops editing: the header
// marks the edits unprotected until a write succeeds, and the error is
// returned for the status line.
func (m *Model) record() error { return m.recordStack(m.stack) }

// recordStack writes s to the journal.
func (m *Model) recordStack(s *engine.Stack) error {
	if m.file.journal == nil {
		return nil
	}
	err := m.file.journal.Record(s)
	m.file.unprotected = err != nil
	return err
}

// undo and redo swap whole snapshots.
func (m *Model) undo() tea.Cmd {
	s, ok := m.hist.back(snapshot{stack: m.stack, cursor: m.tree.cursor})
	if !ok {
		m.setStatus("nothing to undo", statusError)
		return nil
	}
	return m.restore(s, "undid: ")
}

func (m *Model) redo() tea.Cmd {
	s, ok := m.hist.forward(snapshot{stack: m.stack, cursor: m.tree.cursor})
	if !ok {
		m.setStatus("nothing to redo", statusError)
		return nil
	}
	return m.restore(s, "redid: ")
}

func (m *Model) restore(s snapshot, verb string) tea.Cmd {
	m.stack, m.tree.cursor = s.stack, s.cursor
	m.file.dirty = true
	m.tree.anchor = -1
	m.recompute()
	if err := m.record(); err != nil {
		m.setStatus(verb+s.what+" — but no recovery copy could be written ("+err.Error()+")", statusError)
		return m.widthCmd()
	}
	m.setStatus(verb+s.what, statusInfo)
	return m.widthCmd()
}

// edit is a change to make, as Model.change takes it: what it does, for
// the status line and the undo history, and the function that makes it
// on a copy of the stack.
type edit struct {
	what string
	fn   func(s *engine.Stack) (addr, error)
}

// apply makes an edit the stack view worked out, or says why there is
// none.
func (m *Model) apply(e edit, err error) tea.Cmd {
	if err != nil {
		m.setStatus(err.Error(), statusError)
		return nil
	}
	return m.change(e.what, e.fn)
}

// insertAfter places l after the selected item as one change (see
// placeAfter).
func (m *Model) insertAfter(l engine.Layer, what string) tea.Cmd {
	if err := m.tree.addable(); err != nil {
		return m.apply(edit{}, err)
	}
	return m.change(what, func(s *engine.Stack) (addr, error) { return m.tree.placeAfter(s, l) })
}

// addable says why nothing can be added below the selection: a line the
// engine generates is not a place in the stack.
func (t *stackTree) addable() error {
	if cur := t.current(); cur != nil && cur.gen != nil {
		return fmt.Errorf("select a layer of the stack to add below it; %w", errGenerated(cur))
	}
	return nil
}

// placeAfter puts l after the selected item of s, in the same list; on an
// empty block, gate or branch it goes inside. Inside a fork's list of
// branches a layer becomes a new branch of its own, and a branch can only
// go into a fork. It returns where l went.
func (t *stackTree) placeAfter(s *engine.Stack, l engine.Layer) (addr, error) {
	if err := t.addable(); err != nil {
		return nil, err
	}
	cur := t.current()
	if cur == nil {
		if l.Kind == engine.KindBranch {
			return nil, errBranchOutside
		}
		s.Layers = append(s.Layers, l)
		return addr{len(s.Layers) - 1}, nil
	}
	if c := at(s, cur.addr); c != nil && engine.SpecOf(c.Kind).Body && len(c.Body) == 0 {
		item, err := placed(l, c.Kind == engine.KindFork)
		if err != nil {
			return nil, err
		}
		if err := checkDepth(s, append(cur.addr, 0), item); err != nil {
			return nil, err
		}
		c.Body = append(c.Body, item)
		return append(cur.addr, 0), nil
	}
	ls, i := list(s, cur.addr)
	if ls == nil {
		return nil, errors.New("the selected layer is gone")
	}
	parent := at(s, cur.addr.parent())
	item, err := placed(l, parent != nil && parent.Kind == engine.KindFork)
	if err != nil {
		return nil, err
	}
	if err := checkDepth(s, cur.addr, item); err != nil {
		return nil, err
	}
	*ls = append((*ls)[:i+1], append([]engine.Layer{item}, (*ls)[i+1:]...)...)
	return cur.addr.with(i + 1), nil
}

// errGenerated says why a line the engine makes cannot be edited.
func errGenerated(it *item) error {
	return errors.New(it.gen.what + " follows from its block's settings: edit the block's own line or the layers of its first repeat")
}

// errEmpty is the answer of an edit on an empty stack.
var errEmpty = errors.New("the stack is empty: add a layer with a or :")

// editable returns the selected item when it is one of the stack's own.
func (t *stackTree) editable() (*item, error) {
	cur := t.current()
	switch {
	case cur == nil:
		return nil, errEmpty
	case cur.gen != nil:
		return nil, errGenerated(cur)
	}
	return cur, nil
}

var errBranchOutside = errors.New("a branch goes inside a fork; add a fork (its branches come with it) or select one of its branches")

// placed returns what l becomes in a list: in a fork's list of branches a
// layer is wrapped in a branch of its own; elsewhere a branch is refused.
func placed(l engine.Layer, inFork bool) (engine.Layer, error) {
	switch {
	case inFork && l.Kind != engine.KindBranch:
		return engine.Layer{Kind: engine.KindBranch, Body: []engine.Layer{l}}, nil
	case !inFork && l.Kind == engine.KindBranch:
		return engine.Layer{}, errBranchOutside
	}
	return l, nil
}

// checkDepth refuses an item that would nest deeper than a stack file may
// when placed at a, or a list longer than a stack file may hold.
func checkDepth(s *engine.Stack, a addr, l engine.Layer) error {
	if ls, _ := list(s, a); ls != nil && len(*ls) >= engine.MaxSegment {
		return fmt.Errorf("this list already holds %d items, the most a stack file takes; put some in a block", len(*ls))
	}
	if d := s.Levels(a) + innerLevels(&l); d > stackfile.MaxBlockDepth {
		return fmt.Errorf("that would nest blocks, gates and forks %d deep; the limit is %d — flatten an inner one first", d, stackfile.MaxBlockDepth)
	}
	return nil
}

// innerLevels is how many nesting levels l opens, itself included.
func innerLevels(l *engine.Layer) int {
	if !engine.SpecOf(l.Kind).Body {
		return 0
	}
	n := 0
	for i := range l.Body {
		n = max(n, innerLevels(&l.Body[i]))
	}
	if l.Kind == engine.KindBranch {
		return n // a branch belongs to its fork's level
	}
	return n + 1
}

// stripNames clears the names of l and everything inside it (a copy must
// not reuse names).
func stripNames(l *engine.Layer) {
	l.Name = ""
	for i := range l.Body {
		stripNames(&l.Body[i])
	}
}

// duplicate copies the selected item (names cleared) below it; with a
// range marked, the whole range below its last item, as one step.
func (m *Model) duplicate() tea.Cmd {
	cur, err := m.tree.editable()
	if err != nil {
		return m.apply(edit{}, err)
	}
	if m.tree.anchor >= 0 {
		return m.apply(m.tree.copyRange())
	}
	c := engine.CloneLayers([]engine.Layer{*cur.layer})[0]
	stripNames(&c)
	return m.insertAfter(c, "copied "+engine.Summary(cur.layer))
}

// copyRange copies the selected range (names cleared) below its last
// item, and selects the first copy.
func (t *stackTree) copyRange() (edit, error) {
	parent, lo, hi, err := t.selection()
	if err != nil {
		return edit{}, err
	}
	n := hi - lo + 1
	return edit{fmt.Sprintf("copied %d layer%s", n, plural(n)), func(s *engine.Stack) (addr, error) {
		ls, _ := list(s, append(parent, lo))
		cp := engine.CloneLayers((*ls)[lo : hi+1])
		for i := range cp {
			stripNames(&cp[i])
		}
		*ls = append((*ls)[:hi+1:hi+1], append(cp, (*ls)[hi+1:]...)...)
		return append(parent, hi+1), nil
	}}, nil
}

// errRange is the answer of a range edit on a range that is not one list.
var errRange = errors.New("a range must stay inside one list and hold only the stack's own layers; press v to clear it")

// selection returns the selected sibling range (the cursor item alone
// when no range is marked): the list's parent address and index bounds.
func (t *stackTree) selection() (parent addr, lo, hi int, err error) {
	cur, err := t.editable()
	if err != nil {
		return nil, 0, 0, err
	}
	lo = cur.addr[len(cur.addr)-1]
	hi = lo
	if t.anchor >= 0 && t.anchor < len(t.items) {
		a := t.items[t.anchor].addr
		if t.items[t.anchor].gen != nil || len(a) != len(cur.addr) || a.parent().key() != cur.addr.parent().key() {
			return nil, 0, 0, errRange
		}
		lo, hi = min(lo, a[len(a)-1]), max(hi, a[len(a)-1])
	}
	return cur.addr.parent(), lo, hi, nil
}

// remove deletes the selected item or range.
func (t *stackTree) remove() (edit, error) {
	parent, lo, hi, err := t.selection()
	if err != nil {
		return edit{}, err
	}
	return edit{fmt.Sprintf("deleted %d layer%s", hi-lo+1, plural(hi-lo+1)), func(s *engine.Stack) (addr, error) {
		ls, _ := list(s, append(parent, lo))
		*ls = append((*ls)[:lo], (*ls)[hi+1:]...)
		if len(*ls) == 0 {
			if len(parent) > 0 {
				return parent, nil
			}
			return nil, nil
		}
		return append(parent, min(lo, len(*ls)-1)), nil
	}}, nil
}

// move swaps the selected item with its neighbour (dir −1 up, +1 down).
func (t *stackTree) move(dir int) (edit, error) {
	cur, err := t.editable()
	if err != nil {
		return edit{}, err
	}
	return edit{"moved " + engine.Summary(cur.layer), func(s *engine.Stack) (addr, error) {
		ls, i := list(s, cur.addr)
		j := i + dir
		if j < 0 || j >= len(*ls) {
			return nil, errors.New("already at the end of its list")
		}
		(*ls)[i], (*ls)[j] = (*ls)[j], (*ls)[i]
		return cur.addr.with(j), nil
	}}, nil
}

// wrap puts the selected item or range into a new block.
func (t *stackTree) wrap(st *engine.Stack) (edit, error) {
	parent, lo, hi, err := t.selection()
	if err != nil {
		return edit{}, err
	}
	if p := at(st, parent); p != nil && p.Kind == engine.KindFork {
		return edit{}, errors.New("these are a fork's branches; select layers inside one branch to wrap them")
	}
	return edit{fmt.Sprintf("wrapped %d layer%s in a block", hi-lo+1, plural(hi-lo+1)), func(s *engine.Stack) (addr, error) {
		ls, _ := list(s, append(parent, lo))
		body := append([]engine.Layer(nil), (*ls)[lo:hi+1]...)
		b := engine.Layer{Kind: engine.KindBlock, Repeat: 1, Body: body}
		if err := checkDepth(s, append(parent, lo), b); err != nil {
			return nil, err
		}
		*ls = append((*ls)[:lo], append([]engine.Layer{b}, (*ls)[hi+1:]...)...)
		return append(parent, lo), nil
	}}, nil
}

// scaleFilters multiplies (num/den) the width of the selected layer, or of
// every weighted layer inside the selected block.
func (t *stackTree) scaleFilters(num, den int64) (edit, error) {
	cur, err := t.editable()
	if err != nil {
		return edit{}, err
	}
	verb := "widened"
	if den > num {
		verb = "narrowed"
	}
	return edit{verb + " " + engine.Summary(cur.layer), func(s *engine.Stack) (addr, error) {
		l := at(s, cur.addr)
		n := 0
		var walk func(l *engine.Layer)
		walk = func(l *engine.Layer) {
			if l.Kind.HasWeights() && l.Rel.IsZero() { // a relative width follows its input
				l.Filters = min(max(l.Filters*num/den, 1), engine.MaxChannels)
				n++
			}
			for i := range l.Body {
				walk(&l.Body[i])
			}
		}
		walk(l)
		if n == 0 {
			return nil, fmt.Errorf("%s has no absolute widths; widen works on conv, deconv, dense and the items holding them (relative widths such as x6 follow their input)", l.Kind)
		}
		return cur.addr, nil
	}}, nil
}

func (m *Model) scaleWidth(factor float64) tea.Cmd {
	// scaled once, here: change applies it to its copy of m.stack, and
	// the status line says whether the units were written out
	out, err := engine.ScaleWidth(m.stack, factor, 8)
	what := fmt.Sprintf("scaled every width by %g", factor)
	if err == nil {
		what += unitsNote(m.stack, out)
	}
	return m.change(what, func(s *engine.Stack) (addr, error) {
		if err != nil {
			return nil, err
		}
		*s = *out
		return nil, nil
	})
}

// unitsNote is what a status line adds when a scaling of before wrote its
// units out (engine.UnitsWrittenOut), else "".
func unitsNote(before, after *engine.Stack) string {
	if why, ok := engine.UnitsWrittenOut(before, after); ok {
		return "; " + why
	}
	return ""
}

// insertStage adds a downsampling stage after the selected top-level
// item, as one foldable block: its settings are the stack's (the setup
// form's stage fields, saved with the file), its layers copied from the
// convolution, norm and activation nearest before it (engine.StageTemplate).
func (m *Model) insertStage() tea.Cmd {
	after := -1
	if cur := m.tree.current(); cur != nil {
		after = cur.addr[0]
	}
	opt := engine.StageTemplate(m.stack, after)
	what := fmt.Sprintf("added a stage: halve the size, double the channels (cap %d), %d more repeat%s of %s", opt.Cap, opt.Repeat, plural(opt.Repeat), stageKinds(opt))
	return m.change(what, func(s *engine.Stack) (addr, error) {
		out, n, err := engine.InsertStage(s, after, opt)
		if err != nil {
			return nil, err
		}
		*s = *out
		return addr{after + n}, nil
	})
}

// insertUpStage adds an up-stage after the selected top-level item, as
// one foldable block joined to the earlier item of its output size
// (engine.InsertUpStage); the status line says what it joined, or that
// nothing had the size.
func (m *Model) insertUpStage() tea.Cmd {
	after := -1
	if cur := m.tree.current(); cur != nil {
		after = cur.addr[0]
	}
	opt := engine.StageTemplate(m.stack, after)
	var info engine.UpStage
	fn := func(s *engine.Stack) (addr, error) {
		out, up, err := engine.InsertUpStage(s, after, opt)
		if err != nil {
			return nil, err
		}
		*s, info = *out, up
		return addr{after + 1}, nil
	}
	// A dry run on a copy words the status line; the change then runs
	// once, as one undo step.
	if _, err := fn(m.stack.Clone()); err != nil {
		return m.apply(edit{}, err)
	}
	what := fmt.Sprintf("added %s: double the size to %d×%d, %d channel%s by %s", info.Name, info.Out.H, info.Out.W, info.Out.C, plural(int(info.Out.C)), opt.Up)
	switch {
	case info.Joined == "":
		what += fmt.Sprintf("; no earlier layer is %d×%d, so nothing is joined", info.Out.H, info.Out.W)
	case info.Named >= 0:
		what += fmt.Sprintf("; joined item %d, now named %s", info.Named+1, info.Joined)
	default:
		what += "; joined " + info.Joined
	}
	return m.change(what, fn)
}

// stageKinds names a stage's layers, e.g. "conv k3, norm batch, act leaky-relu 0.2".
func stageKinds(opt engine.StageOptions) string {
	parts := []string{fmt.Sprintf("conv k%d", max(opt.Kernel, 3))}
	if !opt.NoNorm {
		parts = append(parts, "norm "+opt.Norm.String())
	}
	if !opt.NoAct {
		a := "act " + opt.Act.String()
		if opt.Act == engine.ActLeakyReLU && opt.Slope > 0 {
			a += fmt.Sprintf(" %g", opt.Slope)
		}
		parts = append(parts, a)
	}
	return strings.Join(parts, ", ")
}

// replaceLayer puts l at a.
func (m *Model) replaceLayer(a addr, l engine.Layer) tea.Cmd {
	return m.change("edited "+engine.Summary(&l), func(s *engine.Stack) (addr, error) {
		p := at(s, a)
		if p == nil {
			return nil, errors.New("the edited layer is gone")
		}
		*p = l
		return a, nil
	})
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// expandUses gives every use of a unit in s its expansion. A change made
// to a use's rows goes to its unit (engine.EditThroughUse): a field bound
// to a parameter becomes the use's argument, any other changes the unit
// and so every use — one change, one undo step; a change the unit cannot
// take (a layer added inside a use) is refused, since the file keeps only
// the use. A use without a body (one just added) is expanded.
func expandUses(s *engine.Stack) error {
	if !hasUses(s.Layers) {
		return nil
	}
	fresh := s.Clone()
	if err := engine.ExpandUnits(fresh); err != nil {
		return err
	}
	lifted, err := liftUses(s, s.Layers, fresh.Layers)
	if err != nil {
		return err
	}
	if lifted {
		fresh = s.Clone()
		if err := engine.ExpandUnits(fresh); err != nil {
			return err
		}
	}
	s.Layers = fresh.Layers
	return nil
}

func hasUses(ls []engine.Layer) bool {
	for i := range ls {
		if ls[i].Unit != "" || hasUses(ls[i].Body) {
			return true
		}
	}
	return false
}

// liftUses finds the uses in ls whose rows were changed (they differ from
// their fresh expansion) and turns each change into one of its unit.
func liftUses(s *engine.Stack, ls, fresh []engine.Layer) (bool, error) {
	lifted := false
	for i := range ls {
		l := &ls[i]
		switch {
		case i >= len(fresh):
			return lifted, nil
		case l.Unit != "" && l.Body != nil && !engine.EqualLayers(l.Body, fresh[i].Body):
			if err := engine.EditThroughUse(s, l, fresh[i].Body, l.Body); err != nil {
				return false, fmt.Errorf("refused: %w", err)
			}
			lifted = true
		case l.Unit == "":
			more, err := liftUses(s, l.Body, fresh[i].Body)
			if err != nil {
				return false, err
			}
			lifted = lifted || more
		}
	}
	return lifted, nil
}
