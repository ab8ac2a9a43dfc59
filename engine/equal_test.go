package engine

import (
	"math"
	"reflect"
	"testing"
)

// setSome gives v, a zero value, some non-zero value, reaching into
// structs; it reports false for a type it does not know.
func setSome(v reflect.Value) bool {
	switch v.Kind() {
	case reflect.Bool:
		v.SetBool(true)
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		v.SetInt(2)
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		v.SetUint(2)
	case reflect.Float64:
		v.SetFloat(0.5)
	case reflect.String:
		v.SetString("x")
	case reflect.Slice:
		e := reflect.New(v.Type().Elem()).Elem()
		if !setSome(e) {
			return false
		}
		v.Set(reflect.Append(reflect.MakeSlice(v.Type(), 0, 1), e))
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			w := reflect.New(v.Type()).Elem()
			if !setSome(w.Field(i)) {
				return false
			}
			v.Field(i).Set(w.Field(i))
		}
	default:
		return false
	}
	return true
}

// TestEqualFieldsSeesEveryField changes each field of Layer in turn, and
// each field of the structs inside it, and requires EqualFields to see the
// difference: the editor's undo history shares layers that compare equal,
// so a field EqualFields missed would be lost by an undo.
func TestEqualFieldsSeesEveryField(t *testing.T) {
	typ := reflect.TypeOf(Layer{})
	for i := 0; i < typ.NumField(); i++ {
		f := typ.Field(i)
		if f.Name == "Body" {
			continue
		}
		leaves := []reflect.Value{}
		if f.Type.Kind() == reflect.Struct {
			for j := 0; j < f.Type.NumField(); j++ {
				var b Layer
				leaves = append(leaves, reflect.ValueOf(&b).Elem().Field(i).Field(j))
				if !setSome(leaves[j]) {
					t.Fatalf("field %s.%s: a type this test cannot set", f.Name, f.Type.Field(j).Name)
				}
				if a := (Layer{}); a.EqualFields(&b) || b.EqualFields(&a) {
					t.Errorf("EqualFields misses a change of %s.%s", f.Name, f.Type.Field(j).Name)
				}
			}
			continue
		}
		var b Layer
		if !setSome(reflect.ValueOf(&b).Elem().Field(i)) {
			t.Fatalf("field %s: a type this test cannot set", f.Name)
		}
		if a := (Layer{}); a.EqualFields(&b) || b.EqualFields(&a) {
			t.Errorf("EqualFields misses a change of %s", f.Name)
		}
	}
}

// TestEqual checks the deep comparison's cases.
func TestEqual(t *testing.T) {
	conv := Layer{Kind: KindConv, Filters: 8, Kernel: Square(3)}
	block := func(body ...Layer) Layer { return Layer{Kind: KindBlock, Repeat: 2, Body: body} }
	tests := []struct {
		name string
		a, b Layer
		want bool
	}{
		{"same fields", conv, conv, true},
		{"same bodies in different arrays", block(conv, conv), block(conv, conv), true},
		{"a body item differs", block(conv, conv), block(conv, Layer{Kind: KindConv, Filters: 16, Kernel: Square(3)}), false},
		{"a body is longer", block(conv), block(conv, conv), false},
		{"nil body and empty body", Layer{Kind: KindBlock}, Layer{Kind: KindBlock, Body: []Layer{}}, false},
		{"zero and negative zero", Layer{Kind: KindDropout, Rate: 0}, Layer{Kind: KindDropout, Rate: math.Copysign(0, -1)}, false},
		{"NaN equals itself", Layer{Kind: KindNorm, Eps: math.NaN()}, Layer{Kind: KindNorm, Eps: math.NaN()}, true},
	}
	for _, tt := range tests {
		if got := tt.a.Equal(&tt.b); got != tt.want {
			t.Errorf("%s: Equal = %v, want %v", tt.name, got, tt.want)
		}
	}
}
