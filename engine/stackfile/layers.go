package stackfile

import (
	"errors"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// MaxBlockDepth is how deeply blocks may nest.
const MaxBlockDepth = engine.MaxBlockDepth

// kindNames lists every kind key.
func kindNames() []string { return names(engine.Kinds()) }

func (d *decoder) layers(n *yaml.Node) []engine.Layer {
	return d.layerList(n, "layers", "layer ", 0)
}

// layerList reads a list of layer items; prefix numbers them ("layer 3 → ").
func (d *decoder) layerList(n *yaml.Node, field, prefix string, depth int) []engine.Layer {
	n = d.deref(n, field)
	if n == nil {
		return nil
	}
	if n.Kind == yaml.ScalarNode && n.Tag == "!!null" {
		return nil
	}
	if n.Kind != yaml.SequenceNode {
		d.fail(n, field, ErrType, "expected a list of layers (lines starting with '- '), found %s", describe(n))
		return nil
	}
	if len(n.Content) > engine.MaxSegment {
		d.fail(n, field, ErrRange, "holds %d layers; the limit is %d per list", len(n.Content), engine.MaxSegment)
		return nil
	}
	if len(n.Content) == 0 {
		return nil // "[]" and nothing read the same
	}
	out := make([]engine.Layer, 0, len(n.Content))
	for i, item := range n.Content {
		out = append(out, d.layer(item, prefix+strconv.Itoa(i+1), depth))
	}
	return out
}

// layer reads one layer item: a mapping whose first key is the kind, or a
// bare kind word for kinds that need no value (flatten, global-pool).
func (d *decoder) layer(n *yaml.Node, label string, depth int) engine.Layer {
	where := label
	var l engine.Layer
	n = d.deref(n, where)
	if n == nil {
		return l
	}
	if n.Kind == yaml.ScalarNode {
		k, ok := engine.KindByName(n.Value)
		if sp := engine.SpecOf(k); ok && sp.Bare {
			l.Kind = k
			if sp.Main != nil {
				sp.Main.Set(&l, sp.Main.Default)
			}
			return l
		} else if ok {
			what := "its value"
			if sp.Main != nil {
				what = "its " + sp.Main.Key
			}
			d.fail(n, where, ErrMissing, "%s needs %s; write it as {%s: …}", n.Value, what, n.Value)
			return l
		}
		d.badKind(n, where, n.Value)
		return l
	}
	pairs := d.mapping(n, where, "a layer such as {conv: 32, kernel: 3}")
	if pairs == nil {
		return l
	}
	for _, kv := range pairs {
		if kv[0].Value == "unit" {
			return d.use(pairs, label)
		}
	}
	var kindNode, kindVal *yaml.Node
	for _, kv := range pairs {
		if k, ok := engine.KindByName(kv[0].Value); ok {
			if kindNode != nil {
				d.fail(kv[0], where, ErrType, "has two kinds, %q and %q; one layer per list item", kindNode.Value, kv[0].Value)
				return l
			}
			l.Kind, kindNode, kindVal = k, kv[0], kv[1]
		}
	}
	if kindNode == nil {
		var first string
		if len(pairs) > 0 {
			first = pairs[0][0].Value
		}
		d.badKind(n, where, first)
		return l
	}
	where = label + " (" + l.Kind.String() + ")"
	sp := engine.SpecOf(l.Kind)
	d.kindValue(kindVal, where, sp, &l)
	given := make([]bool, len(sp.Params))
	var haveBody bool
	for _, kv := range pairs {
		k, v := kv[0], kv[1]
		if k == kindNode {
			continue
		}
		switch {
		case k.Value == "name":
			if d.unit != nil {
				d.fail(k, where, ErrName, "a unit's layers cannot be named: every use would repeat the name; name the use of %s instead", d.unit.Name)
				continue
			}
			d.layerName(v, where, &l)
			continue
		case k.Value == "note":
			l.Note, _ = d.text(v, where+" → note", MaxNoteLen)
			continue
		case k.Value == "branches" && sp.Branches:
			haveBody = true
			if depth+1 >= MaxBlockDepth+1 {
				d.fail(k, where, ErrNesting, "blocks nest %d deep here; the limit is %d — flatten an inner block", depth+1, MaxBlockDepth)
				continue
			}
			l.Body = d.branchList(v, where+" → branches", label+" → branch ", depth+1)
			continue
		case k.Value == "layers" && sp.Body && !sp.Branches:
			haveBody = true
			if depth+1 >= MaxBlockDepth+1 {
				d.fail(k, where, ErrNesting, "blocks nest %d deep here; the limit is %d — flatten an inner block", depth+1, MaxBlockDepth)
				continue
			}
			l.Body = d.layerList(v, where+" → layers", label+" → ", depth+1)
			continue
		}
		i := paramIndex(sp, k.Value)
		if i < 0 {
			d.unknown(k, where, allowedKeys(sp))
			continue
		}
		given[i] = true
		if v = d.deref(v, where); v != nil {
			d.param(v, where+" → "+k.Value, &sp.Params[i], &l)
		}
	}
	switch {
	case sp.Branches && !haveBody:
		d.fail(n, where, ErrMissing, "needs branches; add them under branches:, one list of layers each ([] passes the map on)")
	case sp.Body && !haveBody && !sp.Bare:
		d.fail(n, where, ErrMissing, "needs layers; add the block's layers under layers:")
	}
	for i := range sp.Params {
		p := &sp.Params[i]
		switch {
		case given[i] && !p.Applies(&l):
			d.fail(n, where, ErrUnknown, "%s", p.OnlyMsg)
		case !given[i] && p.Required && p.Applies(&l):
			d.fail(n, where, ErrMissing, "%s; add e.g. %s", p.Need, p.YAMLHint)
		}
	}
	return l.Normalized()
}

// branchList reads a fork's branches: each a list of layers, or a mapping
// with layers (and optionally name and note).
func (d *decoder) branchList(n *yaml.Node, field, prefix string, depth int) []engine.Layer {
	n = d.deref(n, field)
	if n == nil {
		return nil
	}
	if n.Kind != yaml.SequenceNode {
		d.fail(n, field, ErrType, "expected a list of branches, each a list of layers (e.g. - [{conv: 64, kernel: 1}]), found %s", describe(n))
		return nil
	}
	if len(n.Content) > engine.MaxSegment {
		d.fail(n, field, ErrRange, "holds %d branches; the limit is %d", len(n.Content), engine.MaxSegment)
		return nil
	}
	out := make([]engine.Layer, 0, len(n.Content))
	for i, item := range n.Content {
		label := prefix + strconv.Itoa(i+1)
		item = d.deref(item, label)
		b := engine.Layer{Kind: engine.KindBranch}
		switch {
		case item == nil:
		case item.Kind == yaml.SequenceNode || item.Kind == yaml.ScalarNode && item.Tag == "!!null":
			b.Body = d.layerList(item, label, label+" → layer ", depth)
		case item.Kind == yaml.MappingNode:
			// {layers: [...], name: ..., note: ...}: read as a branch item.
			key := &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: "branch"}
			null := &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!null"}
			wrapped := *item
			wrapped.Content = append([]*yaml.Node{key, null}, item.Content...)
			b = d.layer(&wrapped, label, depth-1)
			if b.Kind != engine.KindBranch {
				continue
			}
		default:
			d.fail(item, label, ErrType, "expected a list of layers for the branch (or [] for the map itself), found %s", describe(item))
		}
		out = append(out, b)
	}
	return out
}

// paramIndex returns the index of the kind's field with key, or −1.
func paramIndex(sp *engine.Spec, key string) int {
	for i := range sp.Params {
		if sp.Params[i].Key == key {
			return i
		}
	}
	return -1
}

// allowedKeys lists the keys an item of the kind may hold, for messages.
func allowedKeys(sp *engine.Spec) []string {
	out := []string{sp.Key}
	for i := range sp.Params {
		out = append(out, sp.Params[i].Key)
	}
	switch {
	case sp.Branches:
		out = append(out, "branches")
	case sp.Body:
		out = append(out, "layers")
	}
	return append(out, "name", "note")
}

func (d *decoder) badKind(n *yaml.Node, where, got string) {
	kinds := kindNames()
	if hint := engine.Suggest(got, kinds); hint != "" && got != "" {
		d.fail(n, where, ErrUnknown, "unknown layer kind %q; did you mean %q? (kinds: %s)", got, hint, strings.Join(kinds, ", "))
		return
	}
	d.fail(n, where, ErrUnknown, "no layer kind found; start the item with one of: %s", strings.Join(kinds, ", "))
}

// kindValue reads the value of the kind key: the kind's main number or word.
func (d *decoder) kindValue(v *yaml.Node, where string, sp *engine.Spec, l *engine.Layer) {
	v = d.deref(v, where)
	if v == nil {
		return
	}
	w := where + " → " + sp.Key
	m := sp.Main
	if m == nil {
		if !(v.Kind == yaml.ScalarNode && (v.Tag == "!!null" || v.Value == "true")) {
			d.fail(v, w, ErrType, "takes no value; write just '- %s'", sp.Key)
		}
		return
	}
	if m.Label != "" {
		w += " (" + m.Label + ")"
	}
	d.param(v, w, m, l)
}

// param reads one field's value by its type and bounds; in a unit's
// layers a value "$name" binds the field to the unit's parameter.
func (d *decoder) param(n *yaml.Node, w string, p *engine.Param, l *engine.Layer) {
	if n.Kind == yaml.ScalarNode && n.Tag == "!!str" && strings.HasPrefix(n.Value, "$") {
		ref, ok := engine.ParamRef(n.Value)
		if !ok {
			d.fail(n, w, ErrName, "%q is not a parameter reference; write $ and a parameter's name, e.g. $c", n.Value)
			return
		}
		key := p.Key
		if sp := engine.SpecOf(l.Kind); sp.Main == p {
			key = sp.Key
		}
		d.bind(n, w, key, ref, p, l)
		return
	}
	var v engine.Value
	ok := true
	switch p.Type {
	case engine.TInt:
		v.Int, ok = d.int(n, w, p.Lo, p.Hi)
	case engine.TPair:
		v.Pair, ok = d.pair(n, w, p.Lo, p.Hi)
	case engine.TFloat:
		v.Float, ok = d.float(n, w, p.FLo, p.FHi)
	case engine.TBool:
		v.Bool, ok = d.bool(n, w)
	case engine.TToggle:
		var b bool
		if b, ok = d.bool(n, w); b {
			v.Int = int64(engine.On)
		} else {
			v.Int = int64(engine.Off)
		}
	case engine.TChoice:
		var i int
		i, ok = d.choice(n, w, p.Choices)
		v.Int = int64(i)
	case engine.TPad:
		if n.Kind == yaml.ScalarNode && n.Tag == "!!str" {
			var i int
			if i, ok = d.choice(n, w, []string{"same", "valid"}); ok {
				v.Pad.Mode = engine.PadSame + engine.PadMode(i)
			}
		} else {
			v.Pad.Size, ok = d.pair(n, w, p.Lo, p.Hi)
		}
	case engine.TGroups:
		if n.Kind == yaml.ScalarNode && n.Tag == "!!str" {
			_, ok = d.choice(n, w, []string{"depthwise"})
			v.Bool = ok
		} else {
			v.Int, ok = d.int(n, w, p.Lo, p.Hi)
		}
	case engine.TShape:
		v.Shape, ok = d.shape(n, w)
	case engine.TWidth:
		if n.Kind == yaml.ScalarNode && n.Tag == "!!str" && strings.ContainsAny(n.Value[:min(len(n.Value), 2)], "x×X/") {
			var err error
			if v, err = p.Parse(n.Value); err != nil {
				d.fail(n, w, ErrRange, "%q: %s", n.Value, fieldWant(err))
				return
			}
		} else {
			v.Int, ok = d.int(n, w, p.Lo, p.Hi)
		}
	case engine.TRef:
		v.Text, ok = d.text(n, w, 1<<10)
		if ok && !engine.ValidName(v.Text) {
			d.fail(n, w, ErrName, "%q is not a layer name; give the name of an earlier layer or block", v.Text)
			return
		}
	}
	if ok {
		p.Set(l, v)
	}
}

func (d *decoder) layerName(v *yaml.Node, where string, l *engine.Layer) {
	name, ok := d.text(v, where+" → name", 1<<10)
	if !ok {
		return
	}
	if !engine.ValidName(name) {
		d.fail(v, where+" → name", ErrName, "%q is not a short identifier; use letters, digits, '_' and '-', starting with a letter, at most %d characters", name, MaxNameLen)
		return
	}
	if line, dup := d.names[name]; dup {
		d.fail(v, where+" → name", ErrName, "%q is already used on line %d; names must be unique", name, line)
		return
	}
	d.names[name] = v.Line
	l.Name = name
}

// fieldWant is what a refused value should have been.
func fieldWant(err error) string {
	var fe *engine.FieldError
	if errors.As(err, &fe) && fe.Want != "" {
		return fe.Want
	}
	return err.Error()
}
