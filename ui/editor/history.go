package editor

import "stackfit/engine"

// historyLimit is how many changes undo can take back.
const historyLimit = 256

// historyLayers bounds the layers the history holds, undo and redo
// together (a layer is about 400 bytes): a change that rewrites every
// layer of a huge stack, such as a width multiplier, pushes the oldest
// steps out instead of growing without bound. The newest step is always
// kept.
const historyLayers = 100_000

// snapshot is the stack before or after one change, with the cursor.
type snapshot struct {
	stack  *engine.Stack
	cursor int
	what   string // what the change did, for the status line
}

// step turns the current stack into the one before (or, on the redo
// side, after) a change: a change is one step however many layers it
// touched (a stage insert, a width multiplier). A step holds only what
// the change replaced — the items of one list between the unchanged ones
// at its start and end, in the innermost list that holds every difference
// — and the stack's other fields, so unchanged layers are shared with the
// stack and not copied into every step. Stacks are never edited in place
// (see Model.change), which is what makes the sharing safe.
type step struct {
	head     engine.Stack   // the stack's fields but Layers
	at       []int          // the items, by index, down to the list that changes
	from     int            // items kept at the list's start
	keep     int            // items kept at the list's end
	items    []engine.Layer // what goes between them
	nilItems bool           // the list becomes nil (an unset body)
	cursor   int
	what     string
	size     int // layers in items, block bodies included
}

// history keeps the steps undo and redo take.
type history struct {
	undo, redo []step
	held       int // layers held by all steps
}

// push records a change from before to after and forgets the redo branch.
func (h *history) push(before snapshot, after *engine.Stack) {
	for _, s := range h.redo {
		h.held -= s.size
	}
	h.redo = h.redo[:0]
	s := stepBetween(after, before.stack)
	s.cursor, s.what = before.cursor, before.what
	h.undo = append(h.undo, s)
	h.held += s.size
	drop := 0
	for len(h.undo)-drop > historyLimit || h.held > historyLayers && len(h.undo)-drop > 1 {
		h.held -= h.undo[drop].size
		drop++
	}
	if drop > 0 {
		h.undo = append(h.undo[:0], h.undo[drop:]...)
	}
}

// back returns the state to restore for undo, given the current one.
func (h *history) back(cur snapshot) (snapshot, bool) { return h.take(&h.undo, &h.redo, cur) }

// forward returns the state to restore for redo.
func (h *history) forward(cur snapshot) (snapshot, bool) { return h.take(&h.redo, &h.undo, cur) }

// take pops the step to apply from one side and pushes its inverse,
// labelled with the change it undoes or redoes, onto the other.
func (h *history) take(from, to *[]step, cur snapshot) (snapshot, bool) {
	if len(*from) == 0 {
		return snapshot{}, false
	}
	s := (*from)[len(*from)-1]
	*from = (*from)[:len(*from)-1]
	stack, inverse := s.apply(cur.stack)
	inverse.cursor, inverse.what = cur.cursor, s.what
	h.held += inverse.size - s.size
	*to = append(*to, inverse)
	return snapshot{stack: stack, cursor: s.cursor, what: s.what}, true
}

// stepBetween finds the step that turns stack from into stack to.
func stepBetween(from, to *engine.Stack) step {
	s := step{head: *to}
	s.head.Layers = nil
	a, b := from.Layers, to.Layers
	for {
		s.from, s.keep = 0, 0
		for s.from < len(a) && s.from < len(b) && a[s.from].Equal(&b[s.from]) {
			s.from++
		}
		for s.keep < len(a)-s.from && s.keep < len(b)-s.from && a[len(a)-1-s.keep].Equal(&b[len(b)-1-s.keep]) {
			s.keep++
		}
		if len(a)-s.from-s.keep != 1 || len(b)-s.from-s.keep != 1 {
			break
		}
		x, y := &a[s.from], &b[s.from]
		if x.Body == nil || y.Body == nil || !x.EqualFields(y) {
			break
		}
		s.at = append(s.at, s.from) // only this item's body differs: go in
		a, b = x.Body, y.Body
	}
	s.items = append([]engine.Layer(nil), b[s.from:len(b)-s.keep]...)
	s.nilItems = b == nil
	s.size = countLayers(s.items)
	return s
}

// apply returns the stack the step leads to from cur, and the step back.
// The result shares every unchanged layer with cur.
func (s step) apply(cur *engine.Stack) (*engine.Stack, step) {
	inverse := step{head: *cur, at: s.at, from: s.from, keep: s.keep}
	inverse.head.Layers = nil
	next := s.head
	next.Layers = spliceAt(cur.Layers, s.at, s, &inverse)
	inverse.size = countLayers(inverse.items)
	return &next, inverse
}

// spliceAt rebuilds list with the step's items in place in the list that
// the indices at lead to; what they replace goes into inverse. Only the
// lists on the way are new; every other item is shared.
func spliceAt(list []engine.Layer, at []int, s step, inverse *step) []engine.Layer {
	if len(at) > 0 {
		out := append([]engine.Layer(nil), list...)
		out[at[0]].Body = spliceAt(list[at[0]].Body, at[1:], s, inverse)
		return out
	}
	inverse.items = append([]engine.Layer(nil), list[s.from:len(list)-s.keep]...)
	inverse.nilItems = list == nil
	if s.nilItems && s.from+s.keep+len(s.items) == 0 {
		return nil
	}
	out := make([]engine.Layer, 0, s.from+len(s.items)+s.keep)
	out = append(out, list[:s.from]...)
	out = append(out, s.items...)
	return append(out, list[len(list)-s.keep:]...)
}

// countLayers counts the layers in ls, block bodies included.
func countLayers(ls []engine.Layer) int {
	n := len(ls)
	for i := range ls {
		n += countLayers(ls[i].Body)
	}
	return n
}
