package stackfile

import (
	"bytes"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// SaveOver writes s as a stack file that replaces old, the file as it was
// last read or written. When old already reads as s it is returned
// unchanged, byte for byte. Otherwise the result is the canonical form of
// s carrying old's comments: those of the document, of each top-level key
// and training and stage setting, and of each layer item that still exists — matched
// in its list by content (an unchanged layer), by name, or by position and
// kind between unchanged neighbours (an edited one); a deleted layer's
// comments go with it. The result always loads back as s: if the comments
// cannot be placed so that it does, they are left out.
func SaveOver(old []byte, s *engine.Stack) ([]byte, error) {
	canonical, err := Save(s)
	if err != nil || len(old) == 0 {
		return canonical, err
	}
	prev, err := Load(old)
	if err != nil {
		return canonical, nil // nothing reliable to take comments from
	}
	if was, err := Save(prev); err == nil && bytes.Equal(was, canonical) {
		return old, nil
	}
	var oldDoc yaml.Node
	if yaml.Unmarshal(old, &oldDoc) != nil || len(oldDoc.Content) == 0 {
		return canonical, nil
	}
	doc := document(s)
	copyComments(&oldDoc, doc)
	oldRoot, root := oldDoc.Content[0], doc.Content[0]
	copyComments(oldRoot, root)
	for i := 0; i+1 < len(oldRoot.Content); i += 2 {
		k, v := oldRoot.Content[i], oldRoot.Content[i+1]
		nk, nv := lookup(root, k.Value)
		if nk == nil {
			continue
		}
		copyComments(k, nk)
		copyComments(v, nv)
		switch k.Value {
		case "training", "stage":
			copyKeyComments(v, nv)
		case "layers":
			keepList(v, nv, prev.Layers, s.Layers)
		}
	}
	out, err := encode(doc)
	if err != nil {
		return canonical, nil
	}
	if back, err := Load(out); err != nil {
		return canonical, nil
	} else if again, err := Save(back); err != nil || !bytes.Equal(again, canonical) {
		return canonical, nil
	}
	return out, nil
}

// lookup returns the key and value nodes of key in mapping m.
func lookup(m *yaml.Node, key string) (*yaml.Node, *yaml.Node) {
	if m == nil || m.Kind != yaml.MappingNode {
		return nil, nil
	}
	for i := 0; i+1 < len(m.Content); i += 2 {
		if m.Content[i].Value == key {
			return m.Content[i], m.Content[i+1]
		}
	}
	return nil, nil
}

// copyComments moves a node's own comments to its replacement.
func copyComments(from, to *yaml.Node) {
	if from == nil || to == nil {
		return
	}
	to.HeadComment = firstNonEmpty(from.HeadComment, to.HeadComment)
	to.LineComment = firstNonEmpty(from.LineComment, to.LineComment)
	to.FootComment = firstNonEmpty(from.FootComment, to.FootComment)
	if to.LineComment != "" && to.Style != yaml.FlowStyle && (to.Kind == yaml.SequenceNode || to.Kind == yaml.MappingNode) && len(to.Content) > 0 {
		// A block collection has no line of its own for a line comment: it
		// goes to its first entry's line.
		first := to.Content[0]
		first.LineComment = firstNonEmpty(first.LineComment, to.LineComment)
		to.LineComment = ""
	}
}

// hasComments reports whether n or anything inside it carries a comment.
func hasComments(n *yaml.Node) bool {
	if n == nil {
		return false
	}
	if n.HeadComment != "" || n.LineComment != "" || n.FootComment != "" {
		return true
	}
	for _, c := range n.Content {
		if hasComments(c) {
			return true
		}
	}
	return false
}

// copyKeyComments carries the comments of each key of mapping from that is
// also a key of to (and of its value, when a scalar). A mapping that gains
// key comments is written in block style, where they have a line each.
func copyKeyComments(from, to *yaml.Node) {
	if from == nil || to == nil || from.Kind != yaml.MappingNode || to.Kind != yaml.MappingNode {
		return
	}
	for i := 0; i+1 < len(from.Content); i += 2 {
		k, v := from.Content[i], from.Content[i+1]
		nk, nv := lookup(to, k.Value)
		if nk == nil || !hasComments(k) && !(v.Kind == yaml.ScalarNode && hasComments(v)) {
			continue
		}
		copyComments(k, nk)
		if v.Kind == yaml.ScalarNode && nv.Kind == yaml.ScalarNode {
			copyComments(v, nv)
		}
		if to.Style == yaml.FlowStyle {
			// Key comments need lines of their own; the mapping's line
			// comment moves to its first key.
			to.Style = 0
			if len(to.Content) > 0 && to.LineComment != "" {
				to.Content[0].LineComment = firstNonEmpty(to.Content[0].LineComment, to.LineComment)
				to.LineComment = ""
			}
		}
	}
}

// keepList carries comments from the old list of layer items to the new
// one; prev and cur are the layers those lists hold, item for item.
func keepList(from, to *yaml.Node, prev, cur []engine.Layer) {
	if from == nil || to == nil || from.Kind != yaml.SequenceNode || to.Kind != yaml.SequenceNode ||
		len(from.Content) != len(prev) || len(to.Content) != len(cur) {
		return
	}
	copyComments(from, to)
	for _, p := range matchLayers(prev, cur) {
		keepItem(from.Content[p[0]], to.Content[p[1]], &prev[p[0]], &cur[p[1]])
	}
}

// keepItem carries one layer item's comments, and its body's.
func keepItem(from, to *yaml.Node, prev, cur *engine.Layer) {
	copyComments(from, to)
	if from.Kind == yaml.MappingNode && to.Kind == yaml.MappingNode {
		copyKeyComments(from, to)
	} else if from.Kind == yaml.MappingNode && to.Kind == yaml.ScalarNode && hasComments(from) {
		to.LineComment = firstNonEmpty(to.LineComment, from.LineComment)
	}
	sp := engine.SpecOf(cur.Kind)
	switch {
	case sp.Branches:
		_, fb := lookup(from, "branches")
		_, tb := lookup(to, "branches")
		if fb == nil || tb == nil || fb.Kind != yaml.SequenceNode || tb.Kind != yaml.SequenceNode ||
			len(fb.Content) != len(prev.Body) || len(tb.Content) != len(cur.Body) {
			return
		}
		copyComments(fb, tb)
		for _, p := range matchLayers(prev.Body, cur.Body) {
			f, t := fb.Content[p[0]], tb.Content[p[1]]
			copyComments(f, t)
			if _, fl := lookup(f, "layers"); fl != nil {
				f = fl
			}
			if _, tl := lookup(t, "layers"); tl != nil {
				t = tl
			}
			keepList(f, t, prev.Body[p[0]].Body, cur.Body[p[1]].Body)
		}
	case sp.Body:
		_, fl := lookup(from, "layers")
		_, tl := lookup(to, "layers")
		keepList(fl, tl, prev.Body, cur.Body)
	}
}

func firstNonEmpty(a, b string) string {
	if a != "" {
		return a
	}
	return b
}

// matchLayers pairs the items of two versions of a list: first the longest
// common run of unchanged items (same canonical form), then, between
// those, items with the same name, and items of the same kind in order.
func matchLayers(prev, cur []engine.Layer) [][2]int {
	fp := func(ls []engine.Layer) []string {
		out := make([]string, len(ls))
		for i := range ls {
			data, _ := yaml.Marshal(layerNode(&ls[i]))
			out[i] = string(data)
		}
		return out
	}
	a, b := fp(prev), fp(cur)
	// Longest common subsequence of the fingerprints.
	n, m := len(a), len(b)
	if n*m > 1<<22 {
		return nil // too large to align; the comments of this list are left out
	}
	l := make([][]int32, n+1)
	for i := range l {
		l[i] = make([]int32, m+1)
	}
	for i := n - 1; i >= 0; i-- {
		for j := m - 1; j >= 0; j-- {
			switch {
			case a[i] == b[j]:
				l[i][j] = l[i+1][j+1] + 1
			case l[i+1][j] >= l[i][j+1]:
				l[i][j] = l[i+1][j]
			default:
				l[i][j] = l[i][j+1]
			}
		}
	}
	var pairs [][2]int
	gap := func(i0, i1, j0, j1 int) {
		used := map[int]bool{}
		for i := i0; i < i1; i++ {
			for j := j0; j < j1; j++ {
				if !used[j] && prev[i].Name != "" && prev[i].Name == cur[j].Name {
					pairs, used[j] = append(pairs, [2]int{i, j}), true
					break
				}
			}
		}
		j := j0
		for i := i0; i < i1 && j < j1; i++ {
			if prev[i].Name != "" && hasPair(pairs, i) {
				continue
			}
			for j < j1 && used[j] {
				j++
			}
			if j < j1 && prev[i].Kind == cur[j].Kind {
				pairs, used[j] = append(pairs, [2]int{i, j}), true
				j++
			}
		}
	}
	i, j, gi, gj := 0, 0, 0, 0
	for i < n && j < m {
		switch {
		case a[i] == b[j]:
			gap(gi, i, gj, j)
			pairs = append(pairs, [2]int{i, j})
			i, j = i+1, j+1
			gi, gj = i, j
		case l[i+1][j] >= l[i][j+1]:
			i++
		default:
			j++
		}
	}
	gap(gi, n, gj, m)
	return pairs
}

func hasPair(pairs [][2]int, i int) bool {
	for _, p := range pairs {
		if p[0] == i {
			return true
		}
	}
	return false
}
