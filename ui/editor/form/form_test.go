package form

import (
	"strings"
	"testing"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/x/ansi"

	"stackfit/ui/styles"
)

func press(t tea.KeyType) tea.KeyMsg { return tea.KeyMsg{Type: t} }
func runes(s string) tea.KeyMsg      { return tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(s)} }

// TestFormResults: typing replaces a selected value, tab moves, an
// invalid field refuses accept with a notice, a valid form gives its
// values, esc gives Cancelled, each with the parent's tag.
func TestFormResults(t *testing.T) {
	check := func(v []string) ([]string, []bool) {
		errs := make([]string, len(v))
		if v[0] == "" {
			errs[0] = "filters: give a number"
		}
		return errs, []bool{false, v[0] == "1"} // kernel hidden for filters 1
	}
	f := New("edit conv", []Field{{Key: "filters", Help: "output channels", Value: "32"}, {Key: "kernel", Help: "window", Value: "3"}}, check, "tag", DefaultKeyMap(), styles.DefaultStyles())
	f.Update(runes("4"))
	f.Update(runes("8"))
	if got := f.Values()[0]; got != "48" {
		t.Fatalf("typing into the selected value gave %q", got)
	}
	f.Update(press(tea.KeyTab))
	if f.Focused() != 1 {
		t.Fatal("tab did not move to kernel")
	}
	f.Update(press(tea.KeyShiftTab))
	f.Update(press(tea.KeyCtrlU))
	res, _ := f.Update(press(tea.KeyEnter))
	if res != nil || !strings.Contains(f.View(80, 5), "fix the field marked ✗") || f.Errors()[0] == "" {
		t.Fatalf("an invalid form was accepted: %v", res)
	}
	f.Update(runes("1"))
	if strings.Contains(f.View(80, 5), "kernel") {
		t.Error("a field that does not apply is shown")
	}
	res, _ = f.Update(press(tea.KeyEnter))
	if s, ok := res.(Submitted); !ok || s.Tag != "tag" || s.Values[0] != "1" {
		t.Fatalf("accept gave %#v", res)
	}
	res, _ = f.Update(press(tea.KeyEsc))
	if c, ok := res.(Cancelled); !ok || c.Tag != "tag" {
		t.Fatalf("esc gave %#v", res)
	}
}

func paste(s string) tea.KeyMsg { return tea.KeyMsg{Type: tea.KeyRunes, Runes: []rune(s), Paste: true} }

// TestFormFieldLimit: a field holds up to its limit; an edit past it is
// refused whole (not cut) with a notice naming the field and the limit; a
// first value longer than the limit is kept whole and may be shortened.
func TestFormFieldLimit(t *testing.T) {
	tests := []struct {
		name    string
		value   string
		keys    []tea.KeyMsg
		want    string
		refused bool
	}{
		{"paste up to the limit", "", []tea.KeyMsg{paste("0123456789")}, "0123456789", false},
		{"paste past the limit", "", []tea.KeyMsg{paste("0123456789A")}, "", true},
		{"paste replacing the selection", "abc", []tea.KeyMsg{paste(strings.Repeat("x", 11))}, "abc", true},
		{"typing at the limit", "0123456789", []tea.KeyMsg{press(tea.KeyEnd), runes("x")}, "0123456789", true},
		{"multi-byte counts bytes", "", []tea.KeyMsg{paste("ééééé")}, "ééééé", false},
		{"multi-byte past it", "", []tea.KeyMsg{paste("éééééé")}, "", true},
		{"a long first value is kept", strings.Repeat("y", 30), nil, strings.Repeat("y", 30), false},
		{"and may be shortened", strings.Repeat("y", 30), []tea.KeyMsg{press(tea.KeyEnd), press(tea.KeyBackspace)}, strings.Repeat("y", 29), false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := New("setup", []Field{{Key: "note", Value: tt.value, Limit: 10}}, nil, nil, DefaultKeyMap(), styles.DefaultStyles())
			for _, k := range tt.keys {
				f.Update(k)
			}
			if got := f.Values()[0]; got != tt.want {
				t.Errorf("value %q, want %q", got, tt.want)
			}
			notice := strings.Contains(f.View(200, 5), "note holds at most 10 bytes")
			if notice != tt.refused {
				t.Errorf("refusal notice shown %v, want %v:\n%s", notice, tt.refused, f.View(200, 5))
			}
		})
	}
}

// TestFormKeepsUntouchedValues: a value the user did not change comes back
// exactly as it came, line breaks, tabs and length included, even after
// moving through it; a changed one comes back as typed.
func TestFormKeepsUntouchedValues(t *testing.T) {
	long := strings.Repeat("n", 4000) + "\nline two\twith a tab"
	f := New("edit", []Field{{Key: "a", Value: "32"}, {Key: "note", Value: long, Limit: 4096}}, nil, nil, DefaultKeyMap(), styles.DefaultStyles())
	f.Update(press(tea.KeyTab))
	f.Update(press(tea.KeyLeft)) // a cursor key: the value stays
	f.Update(press(tea.KeyShiftTab))
	f.Update(runes("4"))
	res, _ := f.Update(press(tea.KeyEnter))
	s, ok := res.(Submitted)
	if !ok || s.Values[0] != "4" || s.Values[1] != long {
		t.Fatalf("accept gave %#v", res)
	}
}

// TestSelectedValueWithoutColour: with the no-colour styles a selected
// value (typing replaces it) is marked ‹…›, so it reads without reverse
// video; once typed over, or with the default styles, it has no marks.
func TestSelectedValueWithoutColour(t *testing.T) {
	tests := []struct {
		name  string
		st    styles.Styles
		typed bool
		want  string
	}{
		{"no colour, selected", styles.NoColorStyles(), false, "‹32›"},
		{"no colour, typed over", styles.NoColorStyles(), true, "5"},
		{"colour, selected", styles.DefaultStyles(), false, "32"},
	}
	for _, tt := range tests {
		f := New("edit", []Field{{Key: "filters", Value: "32"}, {Key: "kernel", Value: "3"}}, nil, nil, DefaultKeyMap(), tt.st)
		if tt.typed {
			f.Update(runes("5"))
		}
		v := ansi.Strip(f.View(80, 5))
		if !strings.Contains(v, "filters  "+tt.want+" ") {
			t.Errorf("%s: no %q in\n%s", tt.name, tt.want, v)
		}
		if strings.Contains(v, "‹3›") || (tt.want != "‹32›" && strings.Contains(v, "‹")) {
			t.Errorf("%s: a value that is not selected is marked:\n%s", tt.name, v)
		}
	}
}
