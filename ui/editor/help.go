package editor

import (
	"fmt"
	"strings"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/keymap"
)

// formView draws the open form in place of the stack view.
func (m *Model) formView(lay layout) string {
	f := m.form
	lines := []string{m.st.Label.Render(textsafe.Line(f.title)) + m.st.Dim.Render("  — numbers below follow as you type")}
	labelW := 0
	for _, fl := range f.fields {
		if !fl.hidden {
			labelW = max(labelW, len(fl.key))
		}
	}
	var shown []int // the fields that apply, in order
	at := 0
	for i := range f.fields {
		if !f.fields[i].hidden {
			if i == f.focus {
				at = len(shown)
			}
			shown = append(shown, i)
		}
	}
	first := 0
	if per := lay.listH - 1; at >= per {
		first = at - per + 1
	}
	for _, i := range shown[min(first, len(shown)):] {
		if len(lines) >= lay.listH {
			break
		}
		fl := f.fields[i]
		mark := "  "
		if i == f.focus {
			mark = "▸ "
		}
		in := fl.input.view(m.st.Cursor)
		note := m.st.Dim.Render(fl.help)
		if fl.err != "" {
			note = m.st.Error.Render("✗ " + textsafe.Line(fl.err))
		}
		lines = append(lines, fit(mark+m.st.Label.Render(fit(fl.key, labelW))+"  "+fit(in, 18)+"  "+note, m.width))
	}
	return pad(lines, lay.listH, m.width)
}

// pad completes lines to exactly n lines of width w.
func pad(lines []string, n, w int) string {
	var b strings.Builder
	for i := 0; i < n; i++ {
		s := ""
		if i < len(lines) {
			s = lines[i]
		}
		b.WriteString(fit(s, w))
		b.WriteByte('\n')
	}
	return b.String()
}

func (m *Model) pickerView(lay layout) string {
	p := m.picker
	lines := []string{m.st.Label.Render("add which kind of layer? (a letter jumps to it)")}
	first := max(0, p.sel-(lay.listH-2))
	for i := first; i < len(p.kinds) && len(lines) < lay.listH; i++ {
		k := p.kinds[i]
		line := fmt.Sprintf("  %-12s %s", k, engine.SpecOf(k).Help)
		if i == p.sel {
			line = m.st.Cursor.Render(fit(line, m.width))
		}
		lines = append(lines, line)
	}
	return pad(lines, lay.listH, m.width)
}

// helpView is the full help, generated from the key map, with the
// quick-entry syntax.
func (m *Model) helpView() string {
	h := &m.help
	var b strings.Builder
	b.WriteString(m.st.Title.Render("stackfit — keys") + m.st.Dim.Render("  (? or esc closes; override keys in "+textsafe.Line(m.keysPath())+")"))
	b.WriteString("\n\n")
	b.WriteString(h.FullHelpView(m.keys.FullHelp()))
	b.WriteString("\n\n")
	b.WriteString(m.st.Title.Render("the quick-entry line (:)"))
	b.WriteByte('\n')
	b.WriteString(quickSyntax())
	b.WriteString("\n\n")
	b.WriteString(m.st.Dim.Render("Memory figures are estimates for one GPU; frameworks, kernels and fragmentation differ — keep headroom."))
	lines := strings.Split(b.String(), "\n")
	// Exactly one screen: a final newline would scroll the title off.
	return strings.TrimSuffix(pad(lines, m.height, m.width), "\n")
}

// keysPath is where the help screen says one's own keys go.
func (m *Model) keysPath() string {
	if m.keysFile != "" {
		return m.keysFile
	}
	return "$" + keymap.EnvPath
}
