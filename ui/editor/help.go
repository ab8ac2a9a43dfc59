package editor

import (
	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/editor/helpscreen"
)

// helpSections are the help screen's text after the keys: the
// quick-entry syntax, where one's own keys go, and the memory caution.
func (m *Model) helpSections() []helpscreen.Section {
	return []helpscreen.Section{
		{Title: "the quick-entry line (" + m.keys.QuickAdd.Help().Key + ")", Body: quickSyntax()},
		{Title: "your own keys", Body: "put overrides in " + textsafe.Line(m.keysPath()) + ", a YAML map of action to keys, e.g. redo: [U, ctrl+r]\n(the README lists every action)"},
		{Body: m.st.Dim.Render("Memory figures are estimates for one GPU; frameworks, kernels and fragmentation differ — keep headroom.")},
	}
}

// keysPath is where the help screen says one's own keys go.
func (m *Model) keysPath() string {
	if m.file.keysFile != "" {
		return m.file.keysFile
	}
	return "$" + keymap.EnvPath
}
