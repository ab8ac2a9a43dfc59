package stackfile

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"stackfit/engine"
	"stackfit/engine/examples"
)

// FuzzLoad feeds arbitrary bytes to the loader. Invariants: no panic;
// every failure is an ErrorList of *Error values that wrap a sentinel and
// name a field or a position; a stack that loads saves, reloads to the same
// stack, and saves to the same bytes again.
func FuzzLoad(f *testing.F) {
	f.Add(examples.FruitGrader())
	// Small files only: a large seed slows every mutation.
	files, _ := filepath.Glob("../../testdata/examples/*.yaml")
	files = append(files, "../../testdata/published/lenet5.yaml", "../../testdata/published/dcgan-generator.yaml",
		"../../testdata/published/googlenet.yaml", "../../testdata/papers/spatial-gate-residual.yaml") // units and defaults; a spatial gate
	for _, p := range files {
		if data, err := os.ReadFile(p); err == nil {
			f.Add(data)
		}
	}
	f.Add([]byte("stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: [3, 5], pad: same, groups: depthwise}]\n"))
	f.Add([]byte("a: &a [*a, *a]\n"))
	f.Add([]byte("stackfit: 1\ninput: [3, 8, 8]\nstage:\n  cap: 256   # board limit\n  layers: 0\n  kernel: 5\n  bias: true\n  norm: group\n  groups: 16\n  act: leaky-relu\n  slope: 0.2\nlayers: [{conv: 8, kernel: 3}]\n"))
	f.Add([]byte("stackfit: 1\ninput: [3, 8, 8]\ntraining: {budget: 24GiB, workspace: 1000B}\nstage: {norm: none, act: none, cap: 512}\nlayers: []\n"))
	f.Add([]byte("stackfit: 1\ninput: [8, 8, 8]\nlayers:\n  - block: 2\n    residual: true\n    shortcut: identity\n    drop-path: 0.1\n    layers:\n      - {conv: 16, kernel: 1}\n      - gate: channel\n        layers: [global-pool, {conv: 4, kernel: 1}, {act: relu}, {conv: 16, kernel: 1}, {act: sigmoid}]\n"))
	f.Add([]byte("stackfit: 1\ninput: [3, 8, 8]\nlayers:\n  - block: 2\n    residual: true\n    layers: [{add: x}]\n"))
	f.Add([]byte("stackfit: 1\ninput: [8, 8, 8]\nlayers:\n  - fork: copy\n    name: f\n    branches:\n      - [{conv: x2, kernel: 1, round: 8}]\n      - - {conv: /2, kernel: 3, pad: 1, relative-to: block}\n        - fork: split\n          branches: [[], [{conv: x1, kernel: 1}]]\n      - []\n      - {name: b, layers: [{dense: x4, per-position: true}]}\n  - {norm: layer, eps: 1.0e-06}\n"))
	f.Add([]byte("stackfit: 1\ninput: [16, 8, 8]\ndefaults:\n  conv: {bias: false}\n  norm: {eps: 0.001}\n  act: {slope: 0.2}\nlayers:\n  - {conv: 16, kernel: 1, bias: true}\n  - {norm: batch, eps: 1.0e-05}\n  - {act: leaky-relu}\n  - {conv: x1, kernel: 3, groups: depthwise, relative-to: input}\n  - {conv: 16, kernel: 3, group-width: 8}\n"))
	sentinels := []error{ErrSyntax, ErrUnknown, ErrType, ErrRange, ErrMissing, ErrVersion, ErrTooLarge, ErrAlias, ErrNesting, ErrName}
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Load(data)
		if err != nil {
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T %v is not an ErrorList", err, err)
			}
			for _, e := range list {
				ok := false
				for _, sn := range sentinels {
					ok = ok || errors.Is(e, sn)
				}
				if !ok || e.Msg == "" || (e.Field == "" && e.Line == 0 && e.Err != ErrTooLarge && e.Err != ErrSyntax && e.Err != ErrMissing) {
					t.Fatalf("untyped or unlocated error: %#v", e)
				}
			}
			return
		}
		if s.Input.C < 0 || s.Input.H < 0 || s.Input.W < 0 {
			t.Fatalf("negative input %v", s.Input)
		}
		b1, err := Save(s)
		if err != nil {
			t.Fatalf("save: %v", err)
		}
		s2, err := Load(b1)
		if err != nil {
			t.Fatalf("a saved stack does not load: %v\n%s", err, b1)
		}
		if !reflect.DeepEqual(s, s2) {
			t.Fatalf("reload differs:\n%+v\n%+v\n%s", s, s2, b1)
		}
		b2, _ := Save(s2)
		if !bytes.Equal(b1, b2) {
			t.Fatalf("save is not stable:\n%s\n---\n%s", b1, b2)
		}
		// A stack with units, widened, is written with its units (or
		// written out) and reads back computing what the widened
		// expansions compute.
		if len(s.Units) > 0 {
			if wide, err := engine.ScaleWidth(s, 1.5, 8); err == nil {
				rows, _ := engine.ScaleRows(s, engine.Scaling{Width: 1.5, Divisor: 8})
				if data, err := Save(wide); err == nil {
					back, err := Load(data)
					if err != nil {
						t.Fatalf("a widened stack does not load: %v\n%s", err, data)
					}
					if a, b := engine.Evaluate(back), engine.Evaluate(rows); a.Totals != b.Totals || len(a.Rows) != len(b.Rows) {
						t.Fatalf("the widened file computes %+v (%d rows), its expansions %+v (%d rows)\n%s", a.Totals, len(a.Rows), b.Totals, len(b.Rows), data)
					}
				}
			}
		}
		// Saving an edited stack over the file keeps what comments it can
		// and always reads back as the edited stack.
		s2.Name = "edited"
		if len(s2.Layers) > 0 {
			s2.Layers = s2.Layers[1:]
		}
		over, err := SaveOver(data, s2)
		if err != nil {
			t.Fatalf("save over: %v", err)
		}
		want, _ := Save(s2)
		if back, err := Load(over); err != nil {
			t.Fatalf("a save over the file does not load: %v\n%s", err, over)
		} else if got, _ := Save(back); !bytes.Equal(got, want) {
			t.Fatalf("a save over the file reads as another stack:\n%s\n---\n%s", got, want)
		}
	})
}
