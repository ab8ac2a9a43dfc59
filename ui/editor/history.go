package editor

import "stackfit/engine"

// historyLimit is how many changes undo can take back.
const historyLimit = 256

// snapshot is the stack before or after one change, with the cursor.
type snapshot struct {
	stack  *engine.Stack
	cursor int
	what   string // what the change did, for the status line
}

// history keeps whole-stack snapshots: a change is one step however many
// layers it touched (a stage insert, a width multiplier).
type history struct {
	undo, redo []snapshot
}

// push records the state before a change and forgets the redo branch.
func (h *history) push(s snapshot) {
	h.undo = append(h.undo, s)
	if len(h.undo) > historyLimit {
		h.undo = append(h.undo[:0], h.undo[len(h.undo)-historyLimit:]...)
	}
	h.redo = h.redo[:0]
}

// back returns the state to restore for undo, given the current one.
func (h *history) back(cur snapshot) (snapshot, bool) { return step(&h.undo, &h.redo, cur) }

// forward returns the state to restore for redo.
func (h *history) forward(cur snapshot) (snapshot, bool) { return step(&h.redo, &h.undo, cur) }

// step pops the state to restore from one stack and pushes the current
// state, labelled with the change it undoes or redoes, onto the other.
func step(from, to *[]snapshot, cur snapshot) (snapshot, bool) {
	if len(*from) == 0 {
		return snapshot{}, false
	}
	s := (*from)[len(*from)-1]
	*from = (*from)[:len(*from)-1]
	cur.what = s.what
	*to = append(*to, cur)
	return s, true
}
