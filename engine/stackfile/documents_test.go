package stackfile

import (
	"errors"
	"testing"
)

// TestSecondDocument: a stack file holds one YAML document; a second one
// ("---" and more, YAML 1.2 spec §9.2 document markers) is an error that
// names its line, whatever it holds — a stack, nothing, broken YAML or an
// alias — instead of being silently ignored.
func TestSecondDocument(t *testing.T) {
	const stack = "stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: 3}]\n"
	const msg = "file: a second YAML document starts here; a stack file holds one stack — delete this line and what follows, or move that part to a file of its own"
	tests := []struct{ name, src, want string }{
		{"a second stack", stack + "---\n" + stack, "4:1: " + msg},
		{"after an explicit first marker", "---\n" + stack + "--- # more\n" + stack, "5:1: " + msg},
		{"an empty second document", stack + "---\n", ""},
		{"a broken second document", stack + "\n---\n[oops\n", "5:1: " + msg},
		{"an alias in the second document", stack + "---\na: &x [1]\nb: *x\n", "4:1: " + msg},
		{"after an end marker", stack + "...\nname: more\n", "4:1: " + msg}, // the parser stops at the "..."
		{"with errors in the first", "stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 0}]\n---\n" + stack, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Load([]byte(tt.src))
			var list ErrorList
			if !errors.As(err, &list) || len(list) == 0 {
				t.Fatalf("loaded: %v", err)
			}
			if tt.name == "with errors in the first" && len(list) < 2 {
				t.Errorf("the first document's errors are missing: %v", list)
			}
			last := list[len(list)-1]
			if !errors.Is(last, ErrSyntax) || (tt.want != "" && last.Error() != tt.want) || (tt.want == "" && last.Msg != msg[len("file: "):]) {
				t.Errorf("got %q; want %q", last.Error(), tt.want)
			}
		})
	}
	// One document, with or without its markers, still loads.
	for _, src := range []string{stack, "---\n" + stack, "---\n" + stack + "...\n", "# note\n" + stack + "# end\n"} {
		if _, err := Load([]byte(src)); err != nil {
			t.Errorf("%q: %v", src, err)
		}
	}
}
