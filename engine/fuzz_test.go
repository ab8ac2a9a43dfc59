package engine

import (
	"errors"
	"math"
	"reflect"
	"testing"
)

// FuzzParseBytes checks the size parser: no panic, errors wrap ErrSize,
// sizes are never negative, and a formatted exact size parses back.
func FuzzParseBytes(f *testing.F) {
	for _, s := range []string{"24GiB", "24GB", "24000MiB", "1.5 GiB", "80000000000", "-1GiB", "1e400", "NaN", "0x10", "9223372036854775807", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, err := ParseBytes(s)
		if err != nil {
			if !errors.Is(err, ErrSize) {
				t.Fatalf("%q: error %v does not wrap ErrSize", s, err)
			}
			return
		}
		if v < 0 {
			t.Fatalf("%q: negative size %d", s, v)
		}
		back, err := ParseBytes(FormatBytesExact(v))
		if err != nil || back != v {
			t.Fatalf("%d → %q → %d, %v", v, FormatBytesExact(v), back, err)
		}
	})
}

// FuzzFields sets every field of every kind from arbitrary text, as the
// editor's forms do: no panic; a refusal is a *FieldError naming the field;
// an accepted value reads back as text the field accepts again.
func FuzzFields(f *testing.F) {
	for _, s := range []string{"3", "3x5", "same", "valid", "depthwise", "yes", "0.5", "1024x4x4", "-1", "99999999999999999999", "×", "", "name_1", "x\nimport os", "x6", "/4", "x0", "/0", "×1.5", "split"} {
		f.Add(uint8(0), uint8(0), s)
	}
	kinds := Kinds()
	f.Fuzz(func(t *testing.T, k, i uint8, s string) {
		kind := kinds[int(k)%len(kinds)]
		fields := FieldsFor(kind)
		fl := fields[int(i)%len(fields)]
		l := exampleLayer(t, kind)
		err := fl.Set(&l, s)
		if err != nil {
			var fe *FieldError
			if !errors.As(err, &fe) || fe.Field != fl.Key || !errors.Is(err, ErrField) {
				t.Fatalf("%v.%s(%q): %T %v", kind, fl.Key, s, err, err)
			}
			return
		}
		if err := fl.Set(&l, fl.Get(&l)); err != nil {
			t.Fatalf("%v.%s: %q accepted, but its read-back %q is refused: %v", kind, fl.Key, s, fl.Get(&l), err)
		}
		r := Evaluate(&Stack{Input: Shape{16, 32, 32}, Layers: []Layer{l}})
		checkSane(t, r)
	})
}

// FuzzParseQuick reads arbitrary quick-entry lines: no panic, errors wrap
// ErrQuick, and an accepted line's summary reads back as the same layer.
func FuzzParseQuick(f *testing.F) {
	for _, s := range []string{"conv 64 k3 s2 p1", "pool max k3 s2 ceil", "act leaky-relu 0.2", "block 2 residual then relu", "concat a crop", "dense", "reshape 1x1x1", "conv 1 k1 @x", "block 3 residual identity dp0.1 then relu6", "gate channel", "act relu6", "scale 1e-6", "shuffle g3", "act hard-sigmoid", "fork split", "fork copy @f", "fork copy add", "branch", "branch from:Lat3", "branch FROM:x", "conv x6 k1 round8 of-block", "conv /4 k1", "dense x0.25 per-position", "norm layer eps1e-06"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		l, err := ParseQuick(s)
		if err != nil {
			if !errors.Is(err, ErrQuick) {
				t.Fatalf("%q: %v does not wrap ErrQuick", s, err)
			}
			return
		}
		want := l
		want.Name = ""
		back, err := ParseQuick(Summary(&l))
		if err != nil || !reflect.DeepEqual(back, want.Normalized()) {
			t.Fatalf("%q → %q → %+v, %v; want %+v", s, Summary(&l), back, err, want)
		}
	})
}

// stackFromBytes builds a stack deterministically from fuzz bytes: every
// kind, any field values (including absurd ones), nested blocks and merges.
func stackFromBytes(data []byte) *Stack {
	pos := 0
	next := func() int64 {
		if pos >= len(data) {
			return 1
		}
		v := int64(data[pos])
		pos++
		return v
	}
	wide := func() int64 { // occasionally huge, to reach the overflow guards
		v := next()
		switch v % 16 {
		case 0:
			return 0
		case 1:
			return math.MaxInt64 / (next() + 1)
		case 2:
			return -next()
		}
		return v % 9
	}
	names := []string{"a", "b", "c"}
	var layers func(depth int) []Layer
	layers = func(depth int) []Layer {
		n := int(next() % 8)
		out := make([]Layer, 0, n)
		for i := 0; i < n; i++ {
			k := Kind(1 + next()%int64(kindCount-1))
			l := Layer{Kind: k, Filters: wide(), Kernel: Pair{wide(), wide()}, Stride: Pair{wide(), wide()},
				Pad: Padding{Mode: PadMode(next() % 3), Size: Pair{wide(), wide()}}, Dilation: Pair{wide(), wide()},
				Groups: wide(), Depthwise: next()%5 == 0, NoBias: next()%2 == 0, OutPad: Pair{wide(), wide()},
				Pool: PoolMode(next() % 2), Ceil: next()%2 == 0, Size: Pair{wide(), wide()}, Factor: Pair{wide(), wide()},
				Upsample: UpsampleMode(next() % 2), Norm: NormKind(next() % 4), NormGroups: wide(), Affine: Toggle(next() % 3),
				Act: ActKind(next() % int64(len(activations))), Rate: float64(next()%10) / 10, Target: Shape{wide(), wide(), wide()},
				Repeat: wide(), Residual: next()%2 == 0, HasPostAct: next()%2 == 0, Crop: next()%2 == 0,
				From: names[next()%3], IdentityOnly: next()%2 == 0, DropPath: float64(next()%3) / 10}
			switch k {
			case KindScale:
				l.ScaleInit = float64(wide()) / 8
			case KindToSpace, KindToChannels:
				l.PixelFactor = wide()
			case KindKeep:
				l.Keep = wide()
			case KindAct:
				l.PerChannel = next()%2 == 0
			}
			if k == KindFork {
				l.JoinAdd = next()%2 == 0
			}
			if k == KindBranch && next()%2 == 0 {
				l.From = "" // from the fork's input
			}
			if next()%4 == 0 {
				l.GroupWidth = wide()
			}
			if next()%6 == 0 {
				l.Rel, l.RelInput, l.RelBlock = Rel{Mul: float64(next()%8) / 2}, next()%2 == 0, next()%3 == 0
			}
			if next()%3 == 0 {
				l.Name = names[next()%3]
			}
			if SpecOf(k).Body {
				if depth < 3 {
					l.Body = layers(depth + 1)
				}
				l.Repeat = l.Repeat % 5
			}
			out = append(out, l)
		}
		return out
	}
	s := &Stack{Input: Shape{wide(), 1 + next()%40, 1 + next()%40}}
	s.Layers = layers(0)
	if next()%3 == 0 {
		s.Defaults = Defaults{{Kind: KindConv, NoBias: next()%2 == 0}, {Kind: KindNorm, Eps: float64(next()%4) / 1000},
			{Kind: KindAct, Slope: float64(next()%3) / 10}}
	}
	s.Training = Training{Batch: next(), Precision: Precision(next() % 4), Optimizer: Optimizer(next() % 6),
		Budget: wide() << 20, GPUs: next() % 9, Shard: Shard(next() % 4), Accumulate: next() % 5, Checkpoint: next() % 7}
	return s
}

// checkSane asserts what must hold of any result.
func checkSane(t *testing.T, r *Result) {
	t.Helper()
	for i := range r.Rows {
		row := &r.Rows[i]
		if row.Params < 0 || row.Buffers < 0 || row.MACs < 0 || row.Out.C < 0 || row.Out.H < 0 || row.Out.W < 0 {
			t.Fatalf("row %s has a negative number: %+v", row.Path, row)
		}
		if row.Status == StatusOK && !row.Out.Valid() {
			t.Fatalf("row %s is ok with output %v", row.Path, row.Out)
		}
	}
	if r.Totals.Params < 0 || r.Totals.MACs < 0 || r.Totals.Buffers < 0 {
		t.Fatalf("negative totals %+v", r.Totals)
	}
	for _, d := range r.Diags {
		if d.Message() == "" || d.Message() == "unknown problem" {
			t.Fatalf("diagnostic without a message: %+v", d)
		}
	}
}

// FuzzEvaluate runs the engine, the memory model and the fit solver on
// stacks built from arbitrary bytes: no panic, no negative sizes.
func FuzzEvaluate(f *testing.F) {
	f.Add([]byte{3, 1, 5, 2, 64, 3, 3, 1, 1, 1, 1})
	f.Add([]byte{0, 0, 0, 1, 13, 2, 2, 2, 2})
	f.Add([]byte("a long seed that makes blocks, merges and absurd sizes appear"))
	f.Add([]byte{1, 4, 8, 8, 4, 20, 2, 20, 1, 1, 2, 20, 1, 0, 3, 20, 0, 1, 5})
	f.Fuzz(func(t *testing.T, data []byte) {
		s := stackFromBytes(data)
		r := Evaluate(s)
		checkSane(t, r)
		var m Memory
		r.Memory(s.Training, DefaultAssumptions(), &m)
		if m.Total < 0 || m.Activations < 0 || m.Weights < 0 || m.Inference < 0 {
			t.Fatalf("negative memory %+v", m)
		}
		f := SolveCapacity(r, &m, s.Training)
		if f.MaxBatch < 0 || f.MinGPUs < 0 {
			t.Fatalf("negative fit %+v", f)
		}
		var again Result
		again.Evaluate(s)
		again.Evaluate(s) // reuse must give the same answer
		if again.Totals != r.Totals || len(again.Rows) != len(r.Rows) || again.Errors != r.Errors {
			t.Fatalf("re-evaluation differs: %+v vs %+v", again.Totals, r.Totals)
		}
	})
}

// exampleLayer is the layer of the kind's own quick-entry example.
func exampleLayer(t testing.TB, k Kind) Layer {
	l, err := ParseQuick(SpecOf(k).Example)
	if err != nil {
		t.Fatalf("%v: the example %q does not parse: %v", k, SpecOf(k).Example, err)
	}
	return l
}
