package editor

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// promptKind says what a prompt's line is for.
type promptKind uint8

const (
	promptQuick  promptKind = iota // a quick-entry layer line
	promptWidth                    // a width multiplier
	promptSaveAs                   // a file to save to
	promptOpen                     // a file to open
	promptInput                    // the input shape of a new stack
)

// prompt is a one-line input at the bottom of the screen.
type prompt struct {
	kind  promptKind
	label string
	input entry
	hint  string // completion candidates or the parse error
	bad   bool
}

func (m *Model) openPrompt(k promptKind, label, value string) {
	in := newEntry(value, 512)
	in.focus()
	m.prompt = &prompt{kind: k, label: label, input: in}
	m.mode = modePrompt
	m.checkPrompt()
}

// checkPrompt validates the line as typed and sets the hint.
func (m *Model) checkPrompt() {
	p := m.prompt
	v := p.input.Value()
	p.hint, p.bad = "", false
	switch p.kind {
	case promptQuick:
		if strings.TrimSpace(v) == "" {
			p.hint = "e.g. conv 64 k3 s2 p1 · pool max k2 · dense 10 — tab completes the kind, ? lists the syntax"
			return
		}
		if _, err := engine.ParseQuick(v); err != nil {
			p.hint, p.bad = strings.TrimPrefix(err.Error(), engine.ErrQuick.Error()+": "), true
			if f := strings.Fields(v); len(f) == 1 {
				if c := completeKind(f[0]); len(c) > 1 {
					p.hint, p.bad = "kinds: "+strings.Join(c, ", "), false
				}
			}
		}
	case promptWidth:
		if _, err := parseFactor(v); err != nil {
			p.hint, p.bad = err.Error(), true
		}
	case promptInput:
		if _, err := engine.ParseShape("input", v); err != nil {
			p.hint, p.bad = err.Error(), true
		}
	}
	if p.input.fresh && !p.bad && p.hint == "" {
		p.hint = m.keys.Accept.Help().Key + " keeps " + v + " · typing replaces it · " + m.keys.Cancel.Help().Key + " cancels"
	}
}

func parseFactor(v string) (float64, error) {
	f, err := strconv.ParseFloat(strings.TrimPrefix(strings.TrimSpace(v), "×"), 64)
	if err != nil || !(f > 0) || f > 32 {
		return 0, fmt.Errorf("give a factor above 0 and at most 32, e.g. 0.5 or 1.25")
	}
	return f, nil
}

func (m *Model) updatePrompt(msg tea.KeyMsg) tea.Cmd {
	p := m.prompt
	switch {
	case key.Matches(msg, m.keys.Cancel):
		if p.kind == promptInput {
			m.setStatus("the stack keeps the input "+m.stack.Input.String(), statusInfo)
		}
		m.prompt, m.mode = nil, modeNormal
		return nil
	case key.Matches(msg, m.keys.Complete) && p.kind == promptQuick:
		v := p.input.Value()
		f := strings.Fields(v)
		if len(f) == 1 && !strings.HasSuffix(v, " ") {
			if c := completeKind(f[0]); len(c) == 1 {
				p.input.SetValue(c[0] + " ")
				p.input.CursorEnd()
			} else if len(c) > 1 {
				p.input.SetValue(commonPrefix(c))
				p.input.CursorEnd()
			}
		}
		m.checkPrompt()
		return nil
	case key.Matches(msg, m.keys.Accept):
		return m.acceptPrompt()
	}
	cmd := p.input.update(msg)
	m.checkPrompt()
	return cmd
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

func (m *Model) acceptPrompt() tea.Cmd {
	p := m.prompt
	v := strings.TrimSpace(p.input.Value())
	switch p.kind {
	case promptQuick:
		l, err := engine.ParseQuick(v)
		if err != nil {
			m.checkPrompt()
			return nil
		}
		m.prompt, m.mode = nil, modeNormal
		if engine.SpecOf(l.Kind).Body && len(l.Body) == 0 && l.Kind != engine.KindBlock && l.Kind != engine.KindBranch {
			l.Body = newLayer(l.Kind, m.channelsAt()).Body // a gate or fork with its usual layers
		}
		return m.insertAfter(l, "added "+engine.Summary(&l))
	case promptWidth:
		f, err := parseFactor(v)
		if err != nil {
			return nil
		}
		m.prompt, m.mode = nil, modeNormal
		return m.scaleWidth(f)
	case promptInput:
		s, err := engine.ParseShape("input", v)
		if err != nil {
			return nil
		}
		m.prompt, m.mode = nil, modeNormal
		return m.change("set the input to "+s.String(), func(st *engine.Stack) (addr, error) {
			st.Input = s
			return nil, nil
		})
	case promptSaveAs:
		if v == "" {
			p.hint, p.bad = "give a file name, e.g. net.yaml", true
			return nil
		}
		m.prompt, m.mode = nil, modeNormal
		return m.saveTo(v)
	case promptOpen:
		if v == "" {
			p.hint, p.bad = "give a file name", true
			return nil
		}
		if m.files == nil {
			p.hint, p.bad = "this editor was started without file access; run stackfit FILE instead", true
			return nil
		}
		s, data, err := m.files.Load(v)
		if err != nil {
			p.hint, p.bad = firstLine(err.Error()), true
			return nil
		}
		m.prompt, m.mode = nil, modeNormal
		m.load(s, data, v)
		return m.widthCmd()
	}
	return nil
}

func firstLine(s string) string {
	if i := strings.IndexByte(s, '\n'); i >= 0 {
		return s[:i] + " (and more)"
	}
	return s
}
