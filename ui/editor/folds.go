package editor

import (
	"slices"

	"stackfit/engine"
)

// FoldState keeps which items of one stack file are shown folded, from
// one run of the editor to the next (never in the stack file).
type FoldState interface {
	// Load returns the folded items' keys and the opened repeats' keys; an
	// error says what could not be read (the keys returned are still good).
	Load() (folded, opened []string, err error)
	// Save records them.
	Save(folded, opened []string) error
}

// bodyKeys lists the fold keys of every block, gate, fork and branch of ls
// (the part of the stack under parent), outermost first.
func bodyKeys(ls []engine.Layer, parent addr, out []string) []string {
	for i := range ls {
		if !engine.SpecOf(ls[i].Kind).Body {
			continue
		}
		a := append(append(addr(nil), parent...), i)
		out = append(out, a.key())
		out = bodyKeys(ls[i].Body, a, out)
	}
	return out
}

// setAllFolded folds (or unfolds) every block, gate, fork and branch, and
// closes every later repeat; the cursor stays on the item it was on, or
// on the block that now holds it.
func (m *Model) setAllFolded(fold bool) {
	var at addr
	if it := m.tree.current(); it != nil {
		at = it.addr
	}
	keys := bodyKeys(m.stack.Layers, nil, nil)
	clear(m.tree.folded)
	clear(m.tree.opened)
	if fold {
		for _, k := range keys {
			m.tree.folded[k] = true
		}
	}
	m.tree.rebuild(m.stack, &m.nums.res)
	m.tree.anchor = -1
	for n := len(at); n > 0; n-- { // the deepest visible item holding the old one
		want := addr(at[:n]).key()
		if i := slices.IndexFunc(m.tree.items, func(it item) bool { return it.gen == nil && it.addr.key() == want }); i >= 0 {
			m.tree.cursor = i
			break
		}
	}
	switch {
	case len(keys) == 0:
		m.setStatus("nothing to fold: the stack has no blocks, gates or forks", statusInfo)
	case fold:
		m.setStatus("folded every block, gate and fork", statusInfo)
	default:
		m.setStatus("unfolded every block, gate and fork", statusInfo)
	}
	m.saveFolds()
}

// restoreFolds shows the current file's items folded as they were when
// the editor last left it.
func (m *Model) restoreFolds() {
	clear(m.tree.folded)
	clear(m.tree.opened)
	if m.file.foldsFor == nil || m.file.path == "" {
		return
	}
	folded, opened, err := m.file.foldsFor(m.file.path).Load()
	for _, k := range folded {
		m.tree.folded[k] = true
	}
	for _, k := range opened {
		m.tree.opened[k] = true
	}
	if err != nil {
		m.setStatus(err.Error(), statusError)
	}
}

// saveFolds records what is folded for the current file; the keys of
// items the stack no longer has are left out.
func (m *Model) saveFolds() {
	if m.file.foldsFor == nil || m.file.path == "" {
		return
	}
	var folded, opened []string
	for _, k := range bodyKeys(m.stack.Layers, nil, nil) {
		if m.tree.folded[k] {
			folded = append(folded, k)
		}
	}
	for k, on := range m.tree.opened {
		if on {
			opened = append(opened, k)
		}
	}
	slices.Sort(opened)
	if err := m.file.foldsFor(m.file.path).Save(folded, opened); err != nil {
		m.setStatus("could not keep the fold state: "+err.Error(), statusError)
	}
}
