package stackfile

import (
	"errors"
	"reflect"
	"strings"
	"testing"

	"stackfit/engine"
)

// TestQuietLoad checks the quiet: list: warning names are read in order,
// and every wrong entry is refused with its position and, for a slip, the
// name meant (the suggester every "did you mean" uses).
func TestQuietLoad(t *testing.T) {
	const head = "stackfit: 1\ninput: [3, 8, 8]\nlayers: []\n"
	tests := []struct {
		name     string
		src      string
		want     []engine.Code
		sentinel error
		msg      string // the first error, when one is expected
	}{
		{"two names", head + "quiet: [small-receptive-field, channels-not-multiple-of-8]\n",
			[]engine.Code{engine.WarnFinalRF, engine.WarnChannels8}, nil, ""},
		{"block list", head + "quiet:\n  - fork-one-branch\n", []engine.Code{engine.WarnForkOne}, nil, ""},
		{"empty list is none", head + "quiet: []\n", nil, nil, ""},
		{"misspelt", head + "quiet: [small-receptive-feild]\n", nil,
			ErrUnknown, `4:9: quiet: no warning is named "small-receptive-feild"; did you mean "small-receptive-field"?`},
		{"an error's name", head + "quiet: [merge-unknown]\n", nil,
			ErrUnknown, `4:9: quiet: no warning is named "merge-unknown" (warnings: `},
		{"twice", head + "quiet: [fork-one-branch, fork-one-branch]\n", nil,
			ErrUnknown, `4:26: quiet: "fork-one-branch" is listed twice; keep one`},
		{"not a list", head + "quiet: small-receptive-field\n", nil,
			ErrType, `4:8: quiet: expected a list of warning names, e.g. quiet: [stride-drops-edge]; found the text "small-receptive-field"`},
		{"not a word", head + "quiet: [{a: b}]\n", nil,
			ErrType, `4:9: quiet: expected a warning name, found a mapping`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Load([]byte(tt.src))
			if tt.sentinel == nil {
				if err != nil {
					t.Fatal(err)
				}
				if !reflect.DeepEqual(s.Quiet, tt.want) {
					t.Errorf("Quiet = %v, want %v", s.Quiet, tt.want)
				}
				return
			}
			if err == nil {
				t.Fatal("no error")
			}
			if !errors.Is(err, tt.sentinel) {
				t.Errorf("error %v does not wrap %v", err, tt.sentinel)
			}
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("error %T is not an ErrorList", err)
			}
			if got := list[0].Error(); !strings.HasPrefix(got, tt.msg) {
				t.Errorf("got  %s\nwant %s", got, tt.msg)
			}
		})
	}
}

// TestQuietSave checks that saving keeps the list, that what is saved
// loads back the same, and that saving over a file keeps its comment on
// the list.
func TestQuietSave(t *testing.T) {
	s := &engine.Stack{Input: engine.Shape{C: 3, H: 8, W: 8}, Quiet: []engine.Code{engine.WarnChannels8, engine.WarnFinalRF}}
	out, err := Save(s)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(out), "quiet: [channels-not-multiple-of-8, small-receptive-field]\n") {
		t.Errorf("saved form lacks the list:\n%s", out)
	}
	back, err := Load(out)
	if err != nil || !reflect.DeepEqual(back, s) {
		t.Fatalf("round trip: %v, %+v", err, back)
	}
	// A code that is no warning (a stack built in code) is left out, so
	// the file still loads.
	odd := &engine.Stack{Input: s.Input, Quiet: []engine.Code{engine.ErrMergeUnknown, 250}}
	if out, err := Save(odd); err != nil || strings.Contains(string(out), "quiet") {
		t.Errorf("saved a list of non-warnings: %v\n%s", err, out)
	}
	old := []byte("stackfit: 1\ninput: [3, 8, 8]\n# segmenter: every output sees a patch\nquiet: [small-receptive-field]\nlayers: []\n")
	prev, err := Load(old)
	if err != nil {
		t.Fatal(err)
	}
	prev.Name = "seg"
	kept, err := SaveOver(old, prev)
	if err != nil || !strings.Contains(string(kept), "# segmenter: every output sees a patch\nquiet: [small-receptive-field]\n") {
		t.Errorf("the list or its comment was lost: %v\n%s", err, kept)
	}
}
