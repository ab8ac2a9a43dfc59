package engine

import (
	"fmt"
	"slices"
	"strings"
)

// Defaults are a stack's own defaults: for a kind, values of the fields
// that every layer of the kind takes unless it writes the field itself (a
// norm's eps, a convolution's bias). Each entry is a layer of its kind
// holding only such fields (Param.FileDefault); there is at most one entry
// per kind, in kind order (Defaults.Set keeps them so).
//
// A layer's own value always wins, even one equal to the kind's default:
// a field is "written" when its value is not the zero Value. Evaluation
// reads the defaults on every run (Result.Evaluate applies them to a copy
// of the layers), so changing a default changes every layer that does not
// write the field.
type Defaults []Layer

// For returns the defaults of kind k, or nil when the stack sets none.
func (d Defaults) For(k Kind) *Layer {
	for i := range d {
		if d[i].Kind == k {
			return &d[i]
		}
	}
	return nil
}

// Resolve returns l as evaluation sees it: every file-default field l
// leaves unwritten (and that applies to l) takes the stack's default.
func (d Defaults) Resolve(l *Layer) Layer {
	out := *l
	def := d.For(l.Kind)
	if def == nil {
		return out
	}
	sp := SpecOf(l.Kind)
	for i := range sp.Params {
		p := &sp.Params[i]
		if !p.FileDefault || !p.Applies(&out) || p.get(&out) != (Value{}) {
			continue
		}
		if v := p.get(def); v != (Value{}) {
			p.set(&out, v)
		}
	}
	return out
}

// Set stores the default v of field key for kind k, keeping the entries
// in kind order; the zero Value removes it. The error names the kind or
// the field and says what is allowed.
func (d *Defaults) Set(k Kind, key string, v Value) error {
	p, err := DefaultParam(k, key)
	if err != nil {
		return err
	}
	i := slices.IndexFunc(*d, func(l Layer) bool { return l.Kind == k })
	if i < 0 {
		if v == (Value{}) {
			return nil
		}
		i, _ = slices.BinarySearchFunc(*d, k, func(l Layer, k Kind) int { return int(l.Kind) - int(k) })
		*d = slices.Insert(*d, i, Layer{Kind: k})
	}
	p.set(&(*d)[i], v)
	if isBlankDefault(&(*d)[i]) {
		*d = slices.Delete(*d, i, i+1)
	}
	return nil
}

// isBlankDefault reports whether an entry sets no field.
func isBlankDefault(l *Layer) bool {
	for _, p := range DefaultParams(l.Kind) {
		if p.get(l) != (Value{}) {
			return false
		}
	}
	return true
}

// Clone returns an independent copy.
func (d Defaults) Clone() Defaults { return slices.Clone(d) }

// DefaultParams returns the fields of kind k a stack may give a default
// (none for most kinds).
func DefaultParams(k Kind) []*Param {
	sp := SpecOf(k)
	var out []*Param
	for i := range sp.Params {
		if sp.Params[i].FileDefault {
			out = append(out, &sp.Params[i])
		}
	}
	return out
}

// DefaultKinds lists the kinds that have fields a stack may give a
// default, in kind order.
func DefaultKinds() []Kind {
	var out []Kind
	for _, k := range Kinds() {
		if len(DefaultParams(k)) > 0 {
			out = append(out, k)
		}
	}
	return out
}

// DefaultParam returns the field key of kind k when a stack may give it a
// default; the error names the field and lists what is allowed.
func DefaultParam(k Kind, key string) (*Param, error) {
	ps := DefaultParams(k)
	if len(ps) == 0 {
		return nil, &FieldError{Field: "defaults", Value: k.String(),
			Want: "defaults are for the kinds " + kindList(DefaultKinds()) + "; remove " + k.String() + " from defaults"}
	}
	keys := make([]string, len(ps))
	for i, p := range ps {
		if p.Key == key {
			return p, nil
		}
		keys[i] = p.Key
	}
	want := fmt.Sprintf("a %s default may set %s", k, strings.Join(keys, ", "))
	if paramOf(k, key) != nil {
		want += fmt.Sprintf("; %s differs from layer to layer, so write it on each %s layer", key, k)
	} else {
		want += didYouMean(key, keys)
	}
	return nil, &FieldError{Field: "defaults → " + k.String(), Value: key, Want: want}
}

// paramOf returns kind k's field key, or nil.
func paramOf(k Kind, key string) *Param {
	sp := SpecOf(k)
	for i := range sp.Params {
		if sp.Params[i].Key == key {
			return &sp.Params[i]
		}
	}
	return nil
}

// kindList writes kinds as "a, b and c".
func kindList(ks []Kind) string {
	s := make([]string, len(ks))
	for i, k := range ks {
		s[i] = k.String()
	}
	if len(s) < 2 {
		return strings.Join(s, "")
	}
	return strings.Join(s[:len(s)-1], ", ") + " and " + s[len(s)-1]
}

// defaultedLayers holds the stack's layers with its defaults applied: the
// copy an evaluation reads when the stack has defaults. Its storage is
// reused between evaluations, and sized once per evaluation so that the
// body slices it hands out stay valid.
type defaultedLayers struct {
	buf []Layer
}

// build copies ls (bodies included) with d applied.
func (x *defaultedLayers) build(ls []Layer, d Defaults) []Layer {
	n := countLayers(ls)
	if cap(x.buf) < n {
		x.buf = make([]Layer, 0, n)
	}
	x.buf = x.buf[:0]
	return x.copy(ls, d)
}

func (x *defaultedLayers) copy(ls []Layer, d Defaults) []Layer {
	if ls == nil {
		return nil
	}
	start := len(x.buf)
	for i := range ls {
		x.buf = append(x.buf, d.Resolve(&ls[i]))
	}
	out := x.buf[start:len(x.buf):len(x.buf)]
	for i := range out {
		if out[i].Body != nil {
			out[i].Body = x.copy(out[i].Body, d)
		}
	}
	return out
}

// countLayers counts ls and every body's layers.
func countLayers(ls []Layer) int {
	n := len(ls)
	for i := range ls {
		n += countLayers(ls[i].Body)
	}
	return n
}
