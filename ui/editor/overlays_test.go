package editor

import (
	"github.com/charmbracelet/x/ansi"

	"stackfit/keymap"
	"stackfit/ui/editor/confirm"
	"stackfit/ui/editor/form"
	"stackfit/ui/editor/helpscreen"
	"stackfit/ui/editor/picker"
	"stackfit/ui/editor/prompt"
)

// The modes tests ask for, by the key map's names.
const (
	modeNormal  = keymap.Normal
	modeForm    = keymap.Form
	modePicker  = keymap.Picker
	modePrompt  = keymap.Prompt
	modeConfirm = keymap.Confirm
	modeChart   = keymap.Chart
	modeHelp    = keymap.Help
)

// formOf returns the open form, or nil.
func formOf(m *Model) *form.Model { f, _ := m.overlay.(*form.Model); return f }

// pickerOf returns the open picker, or nil.
func pickerOf(m *Model) *picker.Model { p, _ := m.overlay.(*picker.Model); return p }

// promptOf returns the open prompt, or nil.
func promptOf(m *Model) *prompt.Model { p, _ := m.overlay.(*prompt.Model); return p }

// questionOf returns the open question, or nil.
func questionOf(m *Model) *confirm.Model { q, _ := m.overlay.(*confirm.Model); return q }

// promptHint returns the open prompt's hint ("" when none is open).
func promptHint(m *Model) string {
	if p := promptOf(m); p != nil {
		h, _ := p.Hint()
		return h
	}
	return ""
}

// promptBad reports whether the open prompt's hint is an error.
func promptBad(m *Model) bool {
	if p := promptOf(m); p != nil {
		_, bad := p.Hint()
		return bad
	}
	return false
}

// helpOf returns the open help screen, or nil.
func helpOf(m *Model) *helpscreen.Model { h, _ := m.overlay.(*helpscreen.Model); return h }

// stripANSI drops escape sequences.
func stripANSI(s string) string { return ansi.Strip(s) }
