package stackfile

import (
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// field is one key a layer kind accepts besides its kind key.
type field struct {
	key string
	set func(d *decoder, n *yaml.Node, where string, l *engine.Layer)
}

// kindKeys lists the keys each kind accepts (after the kind key itself);
// name and note are accepted everywhere.
func kindKeys(k engine.Kind) []field {
	switch k {
	case engine.KindConv:
		return []field{fKernel, fStride, fPad, fDilation, fGroups, fBias}
	case engine.KindDeconv:
		return []field{fKernel, fStride, fPad, fDilation, fGroups, fBias, fOutPad}
	case engine.KindPool:
		return []field{fKernel, fStride, fPad, fCeil}
	case engine.KindUpsample:
		return []field{fMode}
	case engine.KindNorm:
		return []field{fNormGroups, fAffine}
	case engine.KindAct:
		return []field{fSlope}
	case engine.KindDense:
		return []field{fBias}
	case engine.KindBlock:
		return []field{fResidual, fShortcutNorm, fPostAct, fStrides, {key: "layers"}}
	case engine.KindConcat, engine.KindAdd:
		return []field{fCrop}
	}
	return nil
}

// MaxBlockDepth is how deeply blocks may nest.
const MaxBlockDepth = engine.MaxBlockDepth

// maxRepeat bounds one block's repeat count.
const maxRepeat = 1024

var (
	fKernel = field{"kernel", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Kernel, _ = d.pair(n, w, 1, maxWindow)
	}}
	fStride = field{"stride", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Stride, _ = d.pair(n, w, 1, maxWindow)
	}}
	fDilation = field{"dilation", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Dilation, _ = d.pair(n, w, 1, maxWindow)
	}}
	fOutPad = field{"out-pad", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.OutPad, _ = d.pair(n, w, 0, maxWindow)
	}}
	fPad = field{"pad", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		if n.Kind == yaml.ScalarNode && n.Tag == "!!str" {
			i, ok := d.choice(n, w, []string{"same", "valid"})
			if ok {
				l.Pad.Mode = engine.PadSame + engine.PadMode(i)
			}
			return
		}
		l.Pad.Size, _ = d.pair(n, w, 0, maxWindow)
	}}
	fGroups = field{"groups", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		if n.Kind == yaml.ScalarNode && n.Tag == "!!str" {
			if _, ok := d.choice(n, w, []string{"depthwise"}); ok {
				l.Depthwise = true
			}
			return
		}
		l.Groups, _ = d.int(n, w, 1, maxChannels)
	}}
	fBias = field{"bias", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		b, ok := d.bool(n, w)
		l.NoBias = ok && !b
	}}
	fCeil = field{"ceil", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Ceil, _ = d.bool(n, w)
	}}
	fMode = field{"mode", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		i, _ := d.choice(n, w, []string{"nearest", "bilinear"})
		l.Upsample = engine.UpsampleMode(i)
	}}
	fNormGroups = field{"groups", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.NormGroups, _ = d.int(n, w, 1, maxChannels)
	}}
	fAffine = field{"affine", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		if b, ok := d.bool(n, w); ok {
			l.Affine = engine.Off
			if b {
				l.Affine = engine.On
			}
		}
	}}
	fResidual = field{"residual", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Residual, _ = d.bool(n, w)
	}}
	fShortcutNorm = field{"shortcut-norm", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		b, ok := d.bool(n, w)
		l.NoShortcutNorm = ok && !b
	}}
	fPostAct = field{"after", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		i, ok := d.choice(n, w, names(engine.ActKinds()))
		l.PostAct, l.HasPostAct = engine.ActKind(i), ok
	}}
	fStrides = field{"strides", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		i, _ := d.choice(n, w, []string{"first", "all"})
		l.AllStrides = i == 1
	}}
	fCrop = field{"crop", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Crop, _ = d.bool(n, w)
	}}
	fSlope = field{"slope", func(d *decoder, n *yaml.Node, w string, l *engine.Layer) {
		l.Slope, _ = d.float(n, w, 0, 1e6)
	}}
)

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
		switch n.Value {
		case "flatten":
			l.Kind = engine.KindFlatten
		case "global-pool":
			l.Kind = engine.KindGlobalPool
			l.Pool = engine.PoolAvg
		default:
			d.badKind(n, where, n.Value)
		}
		return l
	}
	pairs := d.mapping(n, where, "a layer such as {conv: 32, kernel: 3}")
	if pairs == nil {
		return l
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
	d.kindValue(kindVal, where, &l)
	fields := kindKeys(l.Kind)
	var seen fieldsSeen
	for _, kv := range pairs {
		k, v := kv[0], kv[1]
		if k == kindNode {
			continue
		}
		seen.mark(k.Value)
		switch k.Value {
		case "name":
			d.layerName(v, where, &l)
			continue
		case "note":
			l.Note, _ = d.text(v, where+" → note", MaxNoteLen)
			continue
		case "layers":
			if l.Kind == engine.KindBlock {
				if depth+1 >= MaxBlockDepth+1 {
					d.fail(k, where, ErrNesting, "blocks nest %d deep here; the limit is %d — flatten an inner block", depth+1, MaxBlockDepth)
					continue
				}
				l.Body = d.layerList(v, where+" → layers", label+" → ", depth+1)
				continue
			}
		}
		known := false
		for _, f := range fields {
			if f.key == k.Value {
				if v = d.deref(v, where); v != nil {
					f.set(d, v, where+" → "+k.Value, &l)
				}
				known = true
			}
		}
		if !known {
			allowed := []string{l.Kind.String()}
			for _, f := range fields {
				allowed = append(allowed, f.key)
			}
			d.unknown(k, where, append(allowed, "name", "note"))
		}
	}
	d.required(n, where, &l, seen)
	return l.Normalized()
}

func (d *decoder) badKind(n *yaml.Node, where, got string) {
	kinds := kindNames()
	if hint := suggest(got, kinds); hint != "" && got != "" {
		d.fail(n, where, ErrUnknown, "unknown layer kind %q; did you mean %q? (kinds: %s)", got, hint, strings.Join(kinds, ", "))
		return
	}
	d.fail(n, where, ErrUnknown, "no layer kind found; start the item with one of: %s", strings.Join(kinds, ", "))
}

// kindValue reads the value of the kind key: the kind's main number or word.
func (d *decoder) kindValue(v *yaml.Node, where string, l *engine.Layer) {
	v = d.deref(v, where)
	if v == nil {
		return
	}
	w := where + " → " + l.Kind.String()
	switch l.Kind {
	case engine.KindConv, engine.KindDeconv:
		l.Filters, _ = d.int(v, w+" (filters)", 1, maxChannels)
	case engine.KindDense:
		l.Filters, _ = d.int(v, w+" (units)", 1, maxChannels)
	case engine.KindPool, engine.KindGlobalPool:
		i, _ := d.choice(v, w, []string{"max", "avg"})
		l.Pool = engine.PoolMode(i)
	case engine.KindPoolTo:
		l.Size, _ = d.pair(v, w+" (output size)", 1, maxSpatial)
	case engine.KindUpsample:
		l.Factor, _ = d.pair(v, w+" (factor)", 1, maxFactor)
	case engine.KindNorm:
		i, _ := d.choice(v, w, names(engine.NormKinds()))
		l.Norm = engine.NormKind(i)
	case engine.KindAct:
		i, _ := d.choice(v, w, names(engine.ActKinds()))
		l.Act = engine.ActKind(i)
	case engine.KindDropout:
		l.Rate, _ = d.float(v, w+" (rate)", 0, 1)
	case engine.KindFlatten:
		if !(v.Kind == yaml.ScalarNode && (v.Tag == "!!null" || v.Value == "true")) {
			d.fail(v, w, ErrType, "takes no value; write just '- flatten'")
		}
	case engine.KindReshape:
		l.Target, _ = d.shape(v, w+" (target)")
	case engine.KindBlock:
		l.Repeat, _ = d.int(v, w+" (repeats)", 1, maxRepeat)
	case engine.KindConcat, engine.KindAdd:
		name, ok := d.text(v, w+" (layer name)", 1<<10)
		if ok && !engine.ValidName(name) {
			d.fail(v, w, ErrName, "%q is not a layer name; give the name of an earlier layer or block", name)
			return
		}
		l.From = name
	}
}

// fieldsSeen records which of the keys the checks in required look for
// were given.
type fieldsSeen struct{ kernel, groups, layers, shortcutNorm, slope bool }

func (s *fieldsSeen) mark(key string) {
	switch key {
	case "kernel":
		s.kernel = true
	case "groups":
		s.groups = true
	case "layers":
		s.layers = true
	case "shortcut-norm":
		s.shortcutNorm = true
	case "slope":
		s.slope = true
	}
}

// required reports fields a kind cannot do without.
func (d *decoder) required(n *yaml.Node, where string, l *engine.Layer, seen fieldsSeen) {
	switch l.Kind {
	case engine.KindConv, engine.KindDeconv, engine.KindPool:
		if !seen.kernel {
			d.fail(n, where, ErrMissing, "needs a kernel; add e.g. kernel: 3 or kernel: [3, 5]")
		}
	case engine.KindNorm:
		if l.Norm == engine.NormGroup && !seen.groups {
			d.fail(n, where, ErrMissing, "group norm needs groups; add e.g. groups: 32")
		}
		if l.Norm != engine.NormGroup && seen.groups {
			d.fail(n, where, ErrUnknown, "groups applies only to group norm; remove it or write norm: group")
		}
	case engine.KindBlock:
		if !seen.layers {
			d.fail(n, where, ErrMissing, "needs layers; add the block's layers under layers:")
		}
		if l.HasPostAct && !l.Residual {
			d.fail(n, where, ErrUnknown, "after (the activation after the addition) needs residual: true")
		}
		if seen.shortcutNorm && !l.Residual {
			d.fail(n, where, ErrUnknown, "shortcut-norm needs residual: true")
		}
	case engine.KindAct:
		if l.Act != engine.ActLeakyReLU && seen.slope {
			d.fail(n, where, ErrUnknown, "slope applies only to leaky-relu; remove it or write act: leaky-relu")
		}
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
