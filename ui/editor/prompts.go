package editor

import (
	"fmt"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/ui/editor/prompt"
)

// promptKind says what a prompt's line is for; it is the prompt's tag.
type promptKind uint8

const (
	promptQuick  promptKind = iota // a quick-entry layer line
	promptWidth                    // a width multiplier
	promptSaveAs                   // a file to save to
	promptOpen                     // a file to open
	promptInput                    // the input shape of a new stack
)

// promptCheck returns how the line of a prompt of kind k is judged as it
// is typed; the width prompt also previews the scaled stack.
func (m *Model) promptCheck(k promptKind) prompt.Check {
	switch k {
	case promptQuick:
		return func(v string) (string, bool) {
			if strings.TrimSpace(v) == "" {
				return "e.g. conv 64 k3 s2 p1 · pool max k2 · dense 10 — tab completes the kind, ? lists the syntax", false
			}
			if msg, ok := m.unitHint(v); ok {
				return msg, true
			}
			if _, err := engine.ParseQuick(v); err != nil {
				if f := strings.Fields(v); len(f) == 1 {
					if c := completeKind(f[0]); len(c) > 1 {
						return "kinds: " + strings.Join(c, ", "), false
					}
				}
				return strings.TrimPrefix(err.Error(), engine.ErrQuick.Error()+": "), true
			}
			return "", false
		}
	case promptWidth:
		return func(v string) (string, bool) {
			f, err := parseFactor(v)
			if err != nil {
				m.preview = nil
				return err.Error(), true
			}
			out, err := engine.ScaleWidth(m.stack, f, 8)
			if err != nil {
				m.preview = nil
				return err.Error(), true
			}
			m.preview = m.analyzeQuick(out)
			return fmt.Sprintf("preview ×%g: %s parameters, %s MACs, memory %s — enter applies it", f,
				engine.FormatCount(m.preview.Result.Totals.Params), engine.FormatCount(m.preview.Result.Totals.MACs),
				engine.FormatBytes(m.preview.Memory.Total)), false
		}
	case promptInput:
		return func(v string) (string, bool) {
			if _, err := engine.ParseShape("input", v); err != nil {
				return err.Error(), true
			}
			return "", false
		}
	}
	return nil
}

// promptComplete returns the completion of a prompt of kind k: layer
// kinds on the quick-entry line, file names when opening or saving.
func (m *Model) promptComplete(k promptKind) prompt.Complete {
	switch k {
	case promptQuick:
		return func(v string) (string, []string) {
			f := strings.Fields(v)
			if len(f) != 1 || strings.HasSuffix(v, " ") {
				return "", nil
			}
			c := completeKind(f[0])
			switch {
			case len(c) == 1:
				return c[0] + " ", nil
			case len(c) > 1:
				return commonPrefix(c), c
			}
			return "", nil
		}
	case promptOpen, promptSaveAs:
		return func(v string) (string, []string) {
			if m.file.files == nil {
				return "", nil
			}
			names := m.file.files.Names(v)
			switch {
			case len(names) == 1:
				return names[0], nil
			case len(names) > 1:
				base := make([]string, len(names))
				for i, n := range names {
					base[i] = filepath.Base(strings.TrimSuffix(n, "/"))
					if strings.HasSuffix(n, "/") {
						base[i] += "/"
					}
				}
				return commonPrefix(names), base
			}
			return "", nil
		}
	}
	return nil
}

func parseFactor(v string) (float64, error) {
	f, err := strconv.ParseFloat(strings.TrimPrefix(strings.TrimSpace(v), "×"), 64)
	if err != nil || !(f > 0) || f > 32 {
		return 0, fmt.Errorf("give a factor above 0 and at most 32, e.g. 0.5 or 1.25")
	}
	return f, nil
}

func commonPrefix(ss []string) string {
	p := ss[0]
	for _, s := range ss[1:] {
		for !strings.HasPrefix(s, p) {
			p = p[:len(p)-1]
		}
	}
	return p
}

// refuse keeps the open prompt with why it did not take the line.
func (m *Model) refuse(why string) tea.Cmd {
	if p, ok := m.overlay.(*prompt.Model); ok {
		p.Refuse(why)
	}
	return nil
}

// submitPrompt acts on an accepted line; a line it cannot take leaves the
// prompt open with the reason.
func (m *Model) submitPrompt(k promptKind, v string) tea.Cmd {
	switch k {
	case promptQuick:
		if msg, ok := m.unitHint(v); ok {
			return m.refuse(msg)
		}
		l, err := engine.ParseQuick(v)
		if err != nil {
			return m.refuse(strings.TrimPrefix(err.Error(), engine.ErrQuick.Error()+": "))
		}
		m.closeOverlay()
		if engine.SpecOf(l.Kind).Body && len(l.Body) == 0 && l.Kind != engine.KindBlock && l.Kind != engine.KindBranch {
			l.Body = newLayer(l.Kind, m.channelsAt()).Body // a gate or fork with its usual layers
		}
		return m.insertAfter(l, "added "+engine.Summary(&l))
	case promptWidth:
		f, err := parseFactor(v)
		if err != nil {
			return m.refuse(err.Error())
		}
		m.closeOverlay()
		return m.scaleWidth(f)
	case promptInput:
		s, err := engine.ParseShape("input", v)
		if err != nil {
			return m.refuse(err.Error())
		}
		m.closeOverlay()
		return m.change("set the input to "+s.String(), func(st *engine.Stack) (addr, error) {
			st.Input = s
			return nil, nil
		})
	case promptSaveAs:
		if v == "" {
			return m.refuse("give a file name, e.g. net.yaml")
		}
		m.closeOverlay()
		return m.saveTo(v)
	case promptOpen:
		if v == "" {
			return m.refuse("give a file name")
		}
		if m.file.files == nil {
			return m.refuse("this editor was started without file access; run stackfit FILE instead")
		}
		s, data, err := m.file.files.Load(v)
		if err != nil {
			return m.refuse(firstLine(err.Error()))
		}
		m.closeOverlay()
		m.load(s, data, v)
		return m.widthCmd()
	}
	return nil
}

// promptCancelled says what leaving a prompt of kind k kept.
func (m *Model) promptCancelled(k promptKind) {
	switch k {
	case promptInput:
		m.setStatus("kept "+m.stack.Input.String()+" as the input; "+m.keys.Settings.Help().Key+" (setup) changes it, the name and the note", statusInfo)
	case promptWidth:
		m.setStatus("widths unchanged", statusInfo)
	default:
		m.setStatus("", statusInfo)
	}
}

func firstLine(s string) string {
	if i := strings.IndexByte(s, '\n'); i >= 0 {
		return s[:i] + " (and more)"
	}
	return s
}

// unitHint is what a quick-entry line that uses a unit lacks when the
// stack cannot give it: no units defined yet, or none by that name (with
// the stack's units, and the likely one).
func (m *Model) unitHint(v string) (string, bool) {
	f := strings.Fields(v)
	if len(f) == 0 || f[0] != "unit" {
		return "", false
	}
	names := m.stack.UnitNames()
	if len(names) == 0 {
		return "this stack has no units: define them under units: in the file", true
	}
	if len(f) < 2 {
		return "unit needs a unit's name: " + listNames(names), true
	}
	if !slices.Contains(names, f[1]) {
		msg := "no unit " + textsafe.Line(f[1]) + " in this stack; its units: " + listNames(names)
		if s := engine.Suggest(f[1], names); s != "" {
			msg += fmt.Sprintf("; did you mean %q?", s)
		}
		return msg, true
	}
	return "", false
}

// listNames lists up to eight names, then how many more.
func listNames(names []string) string {
	if len(names) <= 8 {
		return strings.Join(names, ", ")
	}
	return strings.Join(names[:8], ", ") + fmt.Sprintf(" and %d more", len(names)-8)
}
