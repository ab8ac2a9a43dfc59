package engine

import (
	"errors"
	"fmt"
	"slices"
	"strings"
)

// ErrQuick is wrapped by every quick-entry parse error.
var ErrQuick = errors.New("cannot read layer line")

// ParseQuick reads one quick-entry line such as "conv 64 k3 s2 p1" into a
// layer: the syntax Summary writes, plus "@name". The kind's description
// says which words and prefixes each field takes.
func ParseQuick(line string) (Layer, error) {
	toks := strings.Fields(strings.ToLower(strings.TrimSpace(line)))
	if len(toks) == 0 {
		return Layer{}, fmt.Errorf("%w: empty; start with a kind such as conv, pool or dense", ErrQuick)
	}
	// Names keep their case.
	orig := strings.Fields(strings.TrimSpace(line))
	if toks[0] == "unit" {
		return parseQuickUse(orig[1:])
	}
	k, ok := KindByName(toks[0])
	if !ok {
		kinds := names(Kinds())
		if hint := Suggest(toks[0], kinds); hint != "" {
			return Layer{}, fmt.Errorf("%w: unknown kind %q; did you mean %q?", ErrQuick, toks[0], hint)
		}
		if c := kindsWithPrefix(toks[0]); len(c) == 1 {
			return Layer{}, fmt.Errorf("%w: unknown kind %q; did you mean %q?", ErrQuick, toks[0], c[0])
		}
		return Layer{}, fmt.Errorf("%w: unknown kind %q; kinds: %s", ErrQuick, toks[0], strings.Join(kinds, ", "))
	}
	sp := SpecOf(k)
	l := Layer{Kind: k}
	rest, origRest := joinThen(toks[1:]), joinThen(orig[1:])
	if m := sp.Main; m != nil {
		if len(rest) > 0 && !strings.HasPrefix(rest[0], "@") && m.takesQuick(rest[0]) {
			tok := rest[0]
			if m.Type == TRef {
				tok = origRest[0] // names keep their case
				if !ValidName(tok) {
					return Layer{}, fmt.Errorf("%w: %q is not a layer name", ErrQuick, tok)
				}
			}
			v, err := m.Parse(strings.TrimPrefix(tok, m.Quick))
			if err != nil {
				return Layer{}, fmt.Errorf("%w: %v", ErrQuick, err)
			}
			m.set(&l, v)
			rest, origRest = rest[1:], origRest[1:]
		} else if m.Optional {
			m.set(&l, m.Default)
		} else {
			if m.Type == TChoice && len(rest) > 0 {
				if hint := Suggest(rest[0], m.Choices); hint != "" {
					return Layer{}, fmt.Errorf("%w: unknown %s %s %q; did you mean %q?", ErrQuick, sp.Key, m.Key, rest[0], hint)
				}
			}
			return Layer{}, fmt.Errorf("%w: %s needs %s, e.g. %s", ErrQuick, sp.Key, m.Need, sp.Example)
		}
	}
	given := make([]string, len(sp.Params)) // the token that set each field
	for i, t := range rest {
		if strings.HasPrefix(t, "@") {
			name := strings.TrimPrefix(origRest[i], "@")
			if !ValidName(name) {
				return Layer{}, fmt.Errorf("%w: %q is not a layer name; use letters, digits, '_' and '-'", ErrQuick, name)
			}
			l.Name = name
			continue
		}
		j, err := sp.quickOption(&l, t, origRest[i])
		if err != nil {
			return Layer{}, err
		}
		given[j] = t
	}
	for i := range sp.Params {
		p := &sp.Params[i]
		switch {
		case given[i] != "" && !p.Applies(&l):
			if p.OnlyQuick != "" {
				return Layer{}, fmt.Errorf("%w: %q %s", ErrQuick, given[i], p.OnlyQuick)
			}
			return Layer{}, fmt.Errorf("%w: %q does not apply to %s; see the help (?) for its options", ErrQuick, given[i], sp.Key)
		case given[i] == "" && p.Required && p.Applies(&l):
			msg := p.Need
			if strings.HasPrefix(msg, "needs ") {
				msg = sp.Key + " " + msg
			}
			return Layer{}, fmt.Errorf("%w: %s; add %s", ErrQuick, msg, p.QuickHint)
		}
	}
	return l.Normalized(), nil
}

// takesQuick reports whether tok is this main value rather than an option.
func (p *Param) takesQuick(tok string) bool {
	switch p.Type {
	case TChoice:
		_, err := ParseChoice("", tok, p.Choices)
		return err == nil
	case TRef:
		return true
	case TWidth:
		return tok != "" && strings.ContainsRune("0123456789x×/", []rune(tok)[0])
	}
	tok = strings.TrimPrefix(tok, p.Quick)
	return tok != "" && (tok[0] >= '0' && tok[0] <= '9' || tok[0] == '.')
}

// quickOption applies one option token such as "k3", "same" or "nobias"
// (orig: the token as typed, for names) and returns the index of the
// field it set. Words are tried before
// prefixes, so that "same" is not read as a stride.
func (s *Spec) quickOption(l *Layer, t, orig string) (int, error) {
	for i := range s.Params {
		p := &s.Params[i]
		if v, ok := p.quickWord(t); ok {
			p.set(l, v)
			return i, nil
		}
	}
	best := -1
	for i := range s.Params {
		p := &s.Params[i]
		if p.Quick != "" && strings.HasPrefix(t, p.Quick) && (best < 0 || len(p.Quick) > len(s.Params[best].Quick)) {
			best = i
		}
	}
	if best < 0 {
		for i := range s.Params {
			if p := &s.Params[i]; p.QuickBare && t != "" && (t[0] >= '0' && t[0] <= '9' || t[0] == '.') {
				best = i
				break
			}
		}
	}
	if best < 0 {
		if hint := Suggest(t, s.quickWords()); hint != "" {
			return 0, fmt.Errorf("%w: %q does not apply to %s; did you mean %q?", ErrQuick, t, s.Key, hint)
		}
		return 0, fmt.Errorf("%w: %q does not apply to %s; see the help (?) for its options", ErrQuick, t, s.Key)
	}
	p := &s.Params[best]
	text := strings.TrimPrefix(t, p.Quick)
	if p.Type == TRef {
		// Names keep their case: the prefix is matched without it.
		n := len(p.Quick)
		if len(orig) < n || !strings.EqualFold(orig[:n], p.Quick) || !ValidName(orig[n:]) {
			return 0, fmt.Errorf("%w: %q is not %s followed by a layer name", ErrQuick, orig, p.Quick)
		}
		text = orig[n:]
	}
	v, err := p.Parse(text)
	if err != nil {
		return 0, fmt.Errorf("%w: %v", ErrQuick, err)
	}
	if p.Type == TPad && v.Pad.Mode != PadExplicit {
		return 0, fmt.Errorf("%w: %q does not apply to %s; write same or valid alone", ErrQuick, t, s.Key)
	}
	p.set(l, v)
	return best, nil
}

// quickWords lists the words quick entry reads after the kind: the
// options' words and, for an optional main value, its choices (the
// candidates of a "did you mean").
func (s *Spec) quickWords() []string {
	var out []string
	if m := s.Main; m != nil && m.Optional && m.Type == TChoice {
		out = append(out, m.Choices...)
	}
	for i := range s.Params {
		p := &s.Params[i]
		for _, w := range p.Words {
			if w != "" {
				out = append(out, w)
			}
		}
		if p.Type == TChoice && p.Words == nil && p.Quick == "" {
			out = append(out, p.Choices...)
		}
	}
	return out
}

// quickWord reads t when it is one of the field's words.
func (p *Param) quickWord(t string) (Value, bool) {
	for i, w := range p.Words {
		if w == "" || w != t {
			continue
		}
		switch p.Type {
		case TBool:
			return Value{Bool: i == 1}, true
		case TToggle, TChoice:
			return Value{Int: int64(i)}, true
		case TPad:
			return Value{Pad: Padding{Mode: PadMode(i + 1)}}, true
		case TGroups:
			return Value{Bool: true}, true
		}
	}
	if p.Type == TChoice && p.Words == nil && p.Quick == "" {
		for i, c := range p.Choices {
			if c == t {
				return Value{Int: int64(i)}, true
			}
		}
	}
	return Value{}, false
}

// joinThen joins "then" with the token after it ("then relu").
func joinThen(toks []string) []string {
	out := make([]string, 0, len(toks))
	for i := 0; i < len(toks); i++ {
		if strings.EqualFold(toks[i], "then") && i+1 < len(toks) {
			out = append(out, "then "+toks[i+1])
			i++
			continue
		}
		out = append(out, toks[i])
	}
	return out
}

// kindsWithPrefix returns the kind keys that start with prefix.
func kindsWithPrefix(prefix string) []string {
	var out []string
	for _, n := range names(Kinds()) {
		if strings.HasPrefix(n, strings.ToLower(prefix)) {
			out = append(out, n)
		}
	}
	return out
}

// parseQuickUse reads a use of a unit as Summary writes it: "unit NAME",
// then PARAM=VALUE words, ×N or xN for a repeat, @name. The values are
// checked when the use is expanded (ExpandUnits), against the unit.
func parseQuickUse(words []string) (Layer, error) {
	if len(words) == 0 || !ValidName(words[0]) {
		return Layer{}, fmt.Errorf("%w: unit needs a unit's name, e.g. unit cna c=64", ErrQuick)
	}
	l := Layer{Kind: KindBlock, Repeat: 1, Unit: words[0]}
	for _, w := range words[1:] {
		switch {
		case strings.HasPrefix(w, "@"):
			if !ValidName(w[1:]) {
				return Layer{}, fmt.Errorf("%w: %q is not a layer name; use letters, digits, '_' and '-'", ErrQuick, w[1:])
			}
			l.Name = w[1:]
		case strings.HasPrefix(w, "×") || strings.HasPrefix(strings.ToLower(w), "x") && len(w) > 1 && w[1] >= '0' && w[1] <= '9':
			n, err := ParseInt("repeat", strings.TrimPrefix(strings.TrimPrefix(strings.ToLower(w), "×"), "x"), 1, MaxRepeat)
			if err != nil {
				return Layer{}, fmt.Errorf("%w: %v", ErrQuick, err)
			}
			l.Repeat = n
		default:
			name, value, ok := strings.Cut(w, "=")
			if !ok || !ValidName(name) || value == "" {
				return Layer{}, fmt.Errorf("%w: %q: give a unit's argument as NAME=VALUE, e.g. c=64", ErrQuick, w)
			}
			if slices.ContainsFunc(l.Args, func(a Arg) bool { return a.Name == name }) {
				return Layer{}, fmt.Errorf("%w: argument %s is given twice", ErrQuick, name)
			}
			l.Args = append(l.Args, Arg{name, value})
		}
	}
	return l, nil
}
