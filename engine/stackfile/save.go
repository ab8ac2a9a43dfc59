package stackfile

import (
	"bytes"
	"fmt"
	"strconv"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// Save writes the canonical stack-file form of s: keys in a fixed order,
// fields at their defaults left out, [h, w] pairs written as one number when
// square.
func Save(s *engine.Stack) ([]byte, error) { return encode(document(s)) }

// document builds the canonical node tree of s.
func document(s *engine.Stack) *yaml.Node {
	root := &yaml.Node{Kind: yaml.MappingNode}
	put(root, "stackfit", intNode(Version))
	if s.Name != "" {
		put(root, "name", strNode(s.Name))
	}
	if s.Note != "" {
		put(root, "note", strNode(s.Note))
	}
	put(root, "input", flowSeq(intNode(s.Input.C), intNode(s.Input.H), intNode(s.Input.W)))
	if t := training(s.Training); t != nil {
		put(root, "training", t)
	}
	if st := stage(s.Stage); st != nil {
		put(root, "stage", st)
	}
	if len(s.Quiet) > 0 {
		q := &yaml.Node{Kind: yaml.SequenceNode, Style: yaml.FlowStyle}
		seen := map[engine.Code]bool{}
		for _, c := range s.Quiet {
			if _, ok := engine.WarningByName(c.Name()); ok && !seen[c] { // what Load accepts, so the file loads back
				seen[c] = true
				q.Content = append(q.Content, strNode(c.Name()))
			}
		}
		if len(q.Content) > 0 {
			put(root, "quiet", q)
		}
	}
	if ds := defaults(s.Defaults); ds != nil {
		put(root, "defaults", ds)
	}
	if len(s.Units) > 0 {
		put(root, "units", unitsNode(s.Units))
	}
	put(root, "layers", layerSeq(s.Layers))
	return &yaml.Node{Kind: yaml.DocumentNode, Content: []*yaml.Node{root}}
}

// encode writes a node tree as YAML with two-space indents.
func encode(doc *yaml.Node) ([]byte, error) {
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(doc); err != nil {
		return nil, fmt.Errorf("encode stack: %w", err)
	}
	if err := enc.Close(); err != nil {
		return nil, fmt.Errorf("encode stack: %w", err)
	}
	return checkSize(buf.Bytes())
}

// checkSize refuses a file Load would refuse for its size, so nothing
// saved is unreadable.
func checkSize(data []byte) ([]byte, error) {
	if len(data) > MaxFileBytes {
		return nil, fmt.Errorf("%w: the stack would take %s as a file, over the 8 MiB a stack file may hold; shorten its notes or split it", ErrTooLarge, engine.FormatBytes(int64(len(data))))
	}
	return data, nil
}

// layerSeq writes a list of layers.
func layerSeq(ls []engine.Layer) *yaml.Node {
	seq := &yaml.Node{Kind: yaml.SequenceNode}
	for i := range ls {
		seq.Content = append(seq.Content, layerNode(&ls[i]))
	}
	if len(ls) == 0 {
		seq.Style = yaml.FlowStyle
	}
	return seq
}

func put(m *yaml.Node, key string, v *yaml.Node) {
	m.Content = append(m.Content, strNode(key), v)
}

func strNode(s string) *yaml.Node {
	n := &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: s}
	if !plainText(s) && !readsBack(n) {
		// The YAML emitter's chosen style would change the text (a note
		// opening with a blank line loses it, one opening with a tab does
		// not even load back); double quotes with escapes keep any string.
		n.Style = yaml.DoubleQuotedStyle
	}
	return n
}

// plainText reports whether s is printable ASCII with no leading or
// trailing space: text every YAML style writes back unchanged.
func plainText(s string) bool {
	if s == "" || s[0] == ' ' || s[len(s)-1] == ' ' {
		return s == ""
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 0x20 || s[i] > 0x7e {
			return false
		}
	}
	return true
}

// readsBack encodes a string node and reports whether decoding gives the
// same string.
func readsBack(n *yaml.Node) bool {
	data, err := yaml.Marshal(n)
	if err != nil {
		return false
	}
	var back string
	return yaml.Unmarshal(data, &back) == nil && back == n.Value
}

func intNode(v int64) *yaml.Node {
	return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: strconv.FormatInt(v, 10)}
}

func floatNode(v float64) *yaml.Node {
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if _, err := strconv.ParseInt(s, 10, 64); err == nil {
		s += ".0"
	}
	return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!float", Value: s}
}

func boolNode(v bool) *yaml.Node {
	return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!bool", Value: strconv.FormatBool(v)}
}

func flowSeq(items ...*yaml.Node) *yaml.Node {
	return &yaml.Node{Kind: yaml.SequenceNode, Style: yaml.FlowStyle, Content: items}
}

// pairNode writes n for a square pair and [h, w] otherwise.
func pairNode(p engine.Pair) *yaml.Node {
	if p.H == p.W {
		return intNode(p.H)
	}
	return flowSeq(intNode(p.H), intNode(p.W))
}

// training writes the training settings that are set, in the order of
// engine.Settings; nil when none is.
func training(t engine.Training) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode}
	for _, s := range engine.Settings() {
		if s.IsDefault(t) {
			continue
		}
		v := strNode(s.Format(t))
		if s.Kind == engine.SettingCount {
			v = &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: s.Format(t)}
		}
		put(m, s.Key, v)
	}
	if len(m.Content) == 0 {
		return nil
	}
	return m
}

// stage writes the stage settings that are set, in the order of
// engine.StageSettings; nil when none is.
func stage(st engine.Stage) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode}
	for _, s := range engine.StageSettings() {
		if s.IsDefault(st) {
			continue
		}
		text := s.Format(st)
		v := strNode(text)
		switch s.Kind {
		case engine.SettingCount:
			v = &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: text}
		case engine.SettingFlag:
			b, _ := engine.ParseBool(s.Key, text)
			v = boolNode(b)
		case engine.SettingReal:
			f, _ := strconv.ParseFloat(text, 64)
			v = floatNode(f)
		}
		put(m, s.Key, v)
	}
	if len(m.Content) == 0 {
		return nil
	}
	return m
}

// layerNode writes one layer item, kind key first, then the fields that
// differ from their defaults, name and note; a kind with a body writes its
// fields after name and note so that the body comes last.
func layerNode(orig *engine.Layer) *yaml.Node {
	if orig.Unit != "" {
		return useNode(orig)
	}
	l := orig.Normalized()
	sp := engine.SpecOf(l.Kind)
	if sp.Bare && sp.Main == nil && l.Name == "" && l.Note == "" && len(l.Binds) == 0 {
		return strNode(sp.Key)
	}
	m := &yaml.Node{Kind: yaml.MappingNode}
	switch {
	case sp.Main != nil && boundNode(&l, sp.Key) != nil:
		put(m, sp.Key, boundNode(&l, sp.Key))
	case sp.Main != nil:
		put(m, sp.Key, valueNode(sp.Main, sp.Main.Get(&l)))
	default:
		put(m, sp.Key, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!null", Value: ""})
	}
	fields := func() {
		for i := range sp.Params {
			p := &sp.Params[i]
			if b := boundNode(&l, p.Key); b != nil {
				put(m, p.Key, b)
			} else if p.Applies(&l) && (p.Required || !p.IsDefault(&l)) {
				put(m, p.Key, valueNode(p, p.Get(&l)))
			}
		}
	}
	if !sp.Body {
		fields()
	}
	if l.Name != "" {
		put(m, "name", strNode(l.Name))
	}
	if l.Note != "" {
		put(m, "note", strNode(l.Note))
	}
	if sp.Branches {
		fields()
		seq := &yaml.Node{Kind: yaml.SequenceNode}
		for i := range l.Body {
			seq.Content = append(seq.Content, branchNode(&l.Body[i]))
		}
		if len(l.Body) == 0 {
			seq.Style = yaml.FlowStyle
		}
		put(m, "branches", seq)
		return m
	}
	if sp.Body {
		fields()
		put(m, "layers", layerSeq(l.Body))
		return m
	}
	if l.Note == "" {
		m.Style = yaml.FlowStyle
	}
	return m
}

// branchNode writes one branch of a fork: its list of layers, or a mapping
// with its fields (from), name, note and layers when it has any of them. An item that
// is not a branch is written as itself (the engine reports it).
func branchNode(b *engine.Layer) *yaml.Node {
	if b.Kind != engine.KindBranch {
		return layerNode(b)
	}
	if b.Name == "" && b.Note == "" && b.From == "" && len(b.Binds) == 0 {
		return layerSeq(b.Body)
	}
	m := &yaml.Node{Kind: yaml.MappingNode}
	sp := engine.SpecOf(engine.KindBranch)
	for i := range sp.Params {
		if p := &sp.Params[i]; boundNode(b, p.Key) != nil {
			put(m, p.Key, boundNode(b, p.Key))
		} else if p.Applies(b) && !p.IsDefault(b) {
			put(m, p.Key, valueNode(p, p.Get(b)))
		}
	}
	if b.Name != "" {
		put(m, "name", strNode(b.Name))
	}
	if b.Note != "" {
		put(m, "note", strNode(b.Note))
	}
	put(m, "layers", layerSeq(b.Body))
	return m
}

// valueNode writes a field's value by its type.
func valueNode(p *engine.Param, v engine.Value) *yaml.Node {
	switch p.Type {
	case engine.TInt:
		return intNode(v.Int)
	case engine.TPair:
		return pairNode(v.Pair)
	case engine.TFloat:
		return floatNode(v.Float)
	case engine.TBool:
		return boolNode(v.Bool)
	case engine.TToggle:
		return boolNode(engine.Toggle(v.Int) == engine.On)
	case engine.TPad:
		switch v.Pad.Mode {
		case engine.PadSame:
			return strNode("same")
		case engine.PadValid:
			return strNode("valid")
		}
		return pairNode(v.Pad.Size)
	case engine.TGroups:
		if v.Bool {
			return strNode("depthwise")
		}
		return intNode(v.Int)
	case engine.TShape:
		return flowSeq(intNode(v.Shape.C), intNode(v.Shape.H), intNode(v.Shape.W))
	case engine.TWidth:
		if v.Rel.IsZero() {
			return intNode(v.Int)
		}
	}
	return strNode(p.Text(v)) // TChoice, TRef
}
