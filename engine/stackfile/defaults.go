package stackfile

import (
	"errors"
	"strings"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// defaults reads the defaults section: per kind key, a mapping of the
// fields every layer of that kind takes unless it writes them
// (defaults: {norm: {eps: 0.001}, conv: {bias: false}}). Values are read
// and bounded as in a layer item.
func (d *decoder) defaults(n *yaml.Node) engine.Defaults {
	var out engine.Defaults
	kinds := names(engine.DefaultKinds())
	for _, kv := range d.mapping(n, "defaults", "kinds with their defaults, e.g. norm: {eps: 0.001}") {
		k, v := kv[0], kv[1]
		kind, ok := engine.KindByName(k.Value)
		if !ok {
			if hint := engine.Suggest(k.Value, kinds); hint != "" {
				d.fail(k, "defaults", ErrUnknown, "unknown layer kind %q; did you mean %q? (defaults are for %s)", k.Value, hint, strings.Join(kinds, ", "))
			} else {
				d.fail(k, "defaults", ErrUnknown, "unknown layer kind %q (defaults are for %s)", k.Value, strings.Join(kinds, ", "))
			}
			continue
		}
		if _, err := engine.DefaultParam(kind, ""); len(engine.DefaultParams(kind)) == 0 {
			d.fail(k, "defaults", ErrUnknown, "%s", fieldWant(err))
			continue
		}
		where := "defaults → " + kind.String()
		for _, fv := range d.mapping(v, where, "fields with their values, e.g. {eps: 0.001}") {
			f, val := fv[0], fv[1]
			p, err := engine.DefaultParam(kind, f.Value)
			if err != nil {
				var fe *engine.FieldError
				sentinel := ErrUnknown
				if errors.As(err, &fe) && strings.Contains(fe.Want, "write it on each") {
					sentinel = ErrType
				}
				d.fail(f, where, sentinel, "%q: %s", f.Value, fieldWant(err))
				continue
			}
			var tmp engine.Layer
			tmp.Kind = kind
			if val = d.deref(val, where); val == nil {
				continue
			}
			d.param(val, where+" → "+f.Value, p, &tmp)
			_ = out.Set(kind, f.Value, p.Get(&tmp)) // the key was checked above
		}
	}
	return out
}

// defaults writes the defaults section, kinds and fields in the engine's
// order; nil when the stack has none.
func defaults(ds engine.Defaults) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode}
	for i := range ds {
		l := &ds[i]
		fields := &yaml.Node{Kind: yaml.MappingNode, Style: yaml.FlowStyle}
		for _, p := range engine.DefaultParams(l.Kind) {
			if v := p.Get(l); v != (engine.Value{}) {
				put(fields, p.Key, valueNode(p, v))
			}
		}
		if len(fields.Content) > 0 {
			put(m, l.Kind.String(), fields)
		}
	}
	if len(m.Content) == 0 {
		return nil
	}
	return m
}
