package stackfile

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// Version is the stack-file format version this package reads and writes.
const Version = 1

// Limits on what a stack file may hold. They keep absurd values from
// reaching the engine and bound the work a hostile file can cause.
const (
	MaxFileBytes    = 8 << 20                // largest stack file accepted
	MaxNameLen      = engine.MaxNameLen      // longest layer name
	MaxNoteLen      = engine.MaxNoteLen      // longest note
	MaxStackNameLen = engine.MaxStackNameLen // longest stack name
	maxErrors       = 20                     // problems reported before giving up
)

// Layer fields are bounded by their kinds' descriptions in the engine;
// shapes (the input, a reshape's target) by the engine's channel and
// spatial limits.

// Load parses a stack file from memory. The returned error is an ErrorList
// (every problem found, each an *Error with line and column).
func Load(data []byte) (*engine.Stack, error) {
	if len(data) > MaxFileBytes {
		return nil, ErrorList{{Msg: fmt.Sprintf("the file is %d bytes; stack files are limited to %d bytes (8 MiB)", len(data), MaxFileBytes), Err: ErrTooLarge}}
	}
	if bytes.IndexByte(data, 0) >= 0 {
		return nil, ErrorList{{Msg: "the file holds binary data (a NUL byte); a stack file is YAML text", Err: ErrSyntax}}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil && err != io.EOF { // io.EOF: no document at all
		return nil, ErrorList{syntaxError(err)}
	}
	first := doc.Line
	if len(doc.Content) > 0 {
		first = doc.Content[0].Line // past the first document's own "---"
	}
	extra := secondDocument(dec, data, first)
	d := &decoder{names: map[string]int{}, unitLines: map[string]int{}}
	if n := findAlias(&doc); n != nil {
		// Refused before anything reads the tree: aliases are how "billion
		// laughs" files expand, and stack files never need them.
		d.fail(n, "file", ErrAlias, "anchors (&) and aliases (*) are not allowed in stack files; write the value out")
	} else {
		s := d.document(&doc)
		if len(d.errs) == 0 && extra == nil {
			return s, nil
		}
	}
	if extra != nil {
		d.errs = append(d.errs, extra)
	}
	return nil, d.errs
}

// secondDocument reports a YAML document after the first ("---" and more
// text): a stack file holds one stack, and what follows would otherwise be
// silently ignored. first is the line the first document's content starts
// on. The second document is parsed but never walked, so its aliases
// expand nothing.
func secondDocument(dec *yaml.Decoder, data []byte, first int) *Error {
	var next yaml.Node
	err := dec.Decode(&next)
	if err == io.EOF {
		return nil
	}
	line := next.Line
	if err == nil && !isDocStart(lineOf(data, line)) && len(next.Content) > 0 {
		line = next.Content[0].Line // no "---": the document starts with its content
	}
	if err != nil { // the second document is not even valid YAML: find its "---"
		line = docStart(data, first)
		if line == 0 {
			line = syntaxError(err).Line
		}
	}
	return &Error{Line: line, Col: 1, Field: "file", Err: ErrSyntax,
		Msg: "a second YAML document starts here; a stack file holds one stack — delete this line and what follows, or move that part to a file of its own"}
}

// docStart returns the line of the first document marker ("---") after
// line first, or 0 when there is none.
func docStart(data []byte, first int) int {
	for i, l := range bytes.Split(data, []byte("\n")) {
		if i+1 > first && isDocStart(l) {
			return i + 1
		}
	}
	return 0
}

// isDocStart reports whether line l is a document start marker.
func isDocStart(l []byte) bool {
	rest, ok := bytes.CutPrefix(l, []byte("---"))
	return ok && (len(rest) == 0 || rest[0] == ' ' || rest[0] == '\t' || rest[0] == '\r')
}

// lineOf returns line n (1-based) of data, or nil.
func lineOf(data []byte, n int) []byte {
	for i := 1; i < n; i++ {
		j := bytes.IndexByte(data, '\n')
		if j < 0 {
			return nil
		}
		data = data[j+1:]
	}
	if j := bytes.IndexByte(data, '\n'); j >= 0 {
		data = data[:j]
	}
	return data
}

// syntaxError converts a YAML parser error into an *Error with the line the
// parser names (where the broken construct starts; the column is unknown).
func syntaxError(err error) *Error {
	msg := strings.TrimPrefix(err.Error(), "yaml: ")
	e := &Error{Err: ErrSyntax}
	if rest, ok := strings.CutPrefix(msg, "line "); ok {
		digits := 0
		for digits < len(rest) && rest[digits] >= '0' && rest[digits] <= '9' {
			digits++
		}
		if tail, ok := strings.CutPrefix(rest[digits:], ": "); ok && digits > 0 {
			e.Line, _ = strconv.Atoi(rest[:digits])
			e.Col = 1
			msg = tail
		}
	}
	e.Msg = "not valid YAML: " + msg + " (check indentation, colons, quotes and brackets from this line on)"
	return e
}

type decoder struct {
	errs  ErrorList
	names map[string]int // layer name → line of first use
	unit  *engine.Unit   // the unit whose layers are being read, if any
	// unitLines: unit name → the line of its definition
	unitLines map[string]int
}

func (d *decoder) fail(n *yaml.Node, field string, sentinel error, format string, args ...any) {
	if len(d.errs) >= maxErrors {
		return
	}
	e := &Error{Field: field, Msg: fmt.Sprintf(format, args...), Err: sentinel}
	if n != nil {
		e.Line, e.Col = n.Line, n.Column
	}
	d.errs = append(d.errs, e)
}

// mapping iterates a mapping node's key/value pairs, reporting a non-mapping.
func (d *decoder) mapping(n *yaml.Node, field, what string) [][2]*yaml.Node {
	n = d.deref(n, field)
	if n == nil {
		return nil
	}
	if n.Kind != yaml.MappingNode {
		d.fail(n, field, ErrType, "expected %s (key: value lines), found %s", what, describe(n))
		return nil
	}
	out := make([][2]*yaml.Node, 0, len(n.Content)/2)
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k := n.Content[i]
		if seen[k.Value] {
			d.fail(k, field, ErrType, "key %q appears twice; keep one", k.Value)
			continue
		}
		seen[k.Value] = true
		out = append(out, [2]*yaml.Node{k, n.Content[i+1]})
	}
	return out
}

// deref refuses aliases: stack files never need them and they are the
// vehicle of "billion laughs" expansion attacks.
func (d *decoder) deref(n *yaml.Node, field string) *yaml.Node {
	if n == nil {
		return nil
	}
	if n.Kind == yaml.AliasNode || n.Anchor != "" {
		d.fail(n, field, ErrAlias, "anchors (&) and aliases (*) are not allowed in stack files; write the value out")
		return nil
	}
	return n
}

// findAlias returns the first anchored or alias node in the tree, or nil.
// The tree holds aliases unexpanded, so this walk is linear in the file.
func findAlias(n *yaml.Node) *yaml.Node {
	if n.Kind == yaml.AliasNode || n.Anchor != "" {
		return n
	}
	for _, c := range n.Content {
		if a := findAlias(c); a != nil {
			return a
		}
	}
	return nil
}

func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		switch n.Tag {
		case "!!null":
			return "nothing"
		case "!!str":
			return fmt.Sprintf("the text %q", n.Value)
		}
		return fmt.Sprintf("%q", n.Value)
	}
	return "something else"
}

func (d *decoder) document(doc *yaml.Node) *engine.Stack {
	if doc.Kind != yaml.DocumentNode || len(doc.Content) == 0 {
		d.fail(nil, "", ErrMissing, "the file is empty; a stack file needs at least input: and layers:")
		return nil
	}
	s := &engine.Stack{}
	var haveInput, haveLayers bool
	top := []string{"stackfit", "name", "note", "input", "training", "stage", "quiet", "defaults", "units", "layers"}
	for _, kv := range d.mapping(doc.Content[0], "file", "a stack (stackfit:, name:, input:, layers:)") {
		k, v := kv[0], kv[1]
		switch k.Value {
		case "stackfit":
			if ver, ok := d.int(v, "stackfit", 1, math.MaxInt32); ok && ver != Version {
				d.fail(v, "stackfit", ErrVersion, "format version %d is not supported; this stackfit reads version %d", ver, Version)
			}
		case "name":
			s.Name, _ = d.text(v, "name", MaxStackNameLen)
		case "note":
			s.Note, _ = d.text(v, "note", MaxNoteLen)
		case "input":
			s.Input, haveInput = d.shape(v, "input")
		case "training":
			s.Training = d.training(v)
		case "stage":
			s.Stage = d.stage(v)
		case "quiet":
			s.Quiet = d.quiet(v)
		case "defaults":
			s.Defaults = d.defaults(v)
		case "units":
			s.Units = d.units(v)
		case "layers":
			haveLayers = true
			s.Layers = d.layers(v)
		default:
			d.unknown(k, "file", top)
		}
	}
	if !haveInput && len(d.errs) == 0 {
		d.fail(doc.Content[0], "input", ErrMissing, "missing; add the per-sample input as [channels, height, width], e.g. input: [3, 224, 224]")
	}
	if !haveLayers && len(d.errs) == 0 {
		d.fail(doc.Content[0], "layers", ErrMissing, "missing; add a list of layers, e.g. layers: [{conv: 32, kernel: 3}]")
	}
	if len(d.errs) == 0 {
		d.expand(s)
	}
	return s
}

func (d *decoder) unknown(k *yaml.Node, field string, allowed []string) {
	if hint := engine.Suggest(k.Value, allowed); hint != "" {
		d.fail(k, field, ErrUnknown, "unknown key %q; did you mean %q? (allowed: %s)", k.Value, hint, strings.Join(allowed, ", "))
		return
	}
	d.fail(k, field, ErrUnknown, "unknown key %q (allowed: %s)", k.Value, strings.Join(allowed, ", "))
}

// scalar returns n when it is a scalar, reporting anything else.
func (d *decoder) scalar(n *yaml.Node, field, want string) *yaml.Node {
	n = d.deref(n, field)
	if n == nil {
		return nil
	}
	if n.Kind != yaml.ScalarNode {
		d.fail(n, field, ErrType, "expected %s, found %s", want, describe(n))
		return nil
	}
	return n
}

// int reads a whole number in [lo, hi].
func (d *decoder) int(n *yaml.Node, field string, lo, hi int64) (int64, bool) {
	n = d.scalar(n, field, "a whole number")
	if n == nil {
		return 0, false
	}
	if n.Tag != "!!int" {
		if n.Tag == "!!float" {
			if f, err := strconv.ParseFloat(n.Value, 64); err == nil && f == math.Trunc(f) && math.Abs(f) >= 1<<63 {
				d.fail(n, field, ErrRange, "%s is too large; it must be at most %d", n.Value, hi)
				return 0, false
			}
		}
		d.fail(n, field, ErrType, "expected a whole number, found %s", describe(n))
		return 0, false
	}
	var v int64
	if err := n.Decode(&v); err != nil {
		d.fail(n, field, ErrRange, "%s does not fit in a 64-bit integer; it must be at most %d", n.Value, hi)
		return 0, false
	}
	if v < lo || v > hi {
		d.fail(n, field, ErrRange, "%d is out of range; it must be between %d and %d", v, lo, hi)
		return 0, false
	}
	return v, true
}

// float reads a real number in [lo, hi).
func (d *decoder) float(n *yaml.Node, field string, lo, hi float64) (float64, bool) {
	n = d.scalar(n, field, "a number")
	if n == nil {
		return 0, false
	}
	var v float64
	if (n.Tag != "!!float" && n.Tag != "!!int") || n.Decode(&v) != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		d.fail(n, field, ErrType, "expected a number, found %s", describe(n))
		return 0, false
	}
	if v < lo || v >= hi {
		d.fail(n, field, ErrRange, "%g is out of range; it must be at least %g and below %g", v, lo, hi)
		return 0, false
	}
	return v, true
}

func (d *decoder) bool(n *yaml.Node, field string) (bool, bool) {
	n = d.scalar(n, field, "true or false")
	if n == nil {
		return false, false
	}
	var v bool
	if n.Tag != "!!bool" || n.Decode(&v) != nil {
		d.fail(n, field, ErrType, "expected true or false, found %s", describe(n))
		return false, false
	}
	return v, true
}

// text reads a string of at most max bytes.
func (d *decoder) text(n *yaml.Node, field string, max int) (string, bool) {
	n = d.scalar(n, field, "text")
	if n == nil {
		return "", false
	}
	if len(n.Value) > max {
		d.fail(n, field, ErrRange, "is %d bytes long; the limit is %d", len(n.Value), max)
		return "", false
	}
	return n.Value, true
}

// choice reads one of a fixed set of words.
func (d *decoder) choice(n *yaml.Node, field string, options []string) (int, bool) {
	n = d.scalar(n, field, "one of "+strings.Join(options, ", "))
	if n == nil {
		return 0, false
	}
	for i, o := range options {
		if strings.EqualFold(n.Value, o) {
			return i, true
		}
	}
	if hint := engine.Suggest(n.Value, options); hint != "" {
		d.fail(n, field, ErrRange, "%q is not one of %s; did you mean %q?", n.Value, strings.Join(options, ", "), hint)
	} else {
		d.fail(n, field, ErrRange, "%q is not one of %s", n.Value, strings.Join(options, ", "))
	}
	return 0, false
}

// pair reads n or [h, w], each in [lo, hi].
func (d *decoder) pair(n *yaml.Node, field string, lo, hi int64) (engine.Pair, bool) {
	n = d.deref(n, field)
	if n == nil {
		return engine.Pair{}, false
	}
	if n.Kind == yaml.SequenceNode {
		if len(n.Content) != 2 {
			d.fail(n, field, ErrType, "expected one number or [height, width], found a list of %d", len(n.Content))
			return engine.Pair{}, false
		}
		h, ok1 := d.int(n.Content[0], field+" height", lo, hi)
		w, ok2 := d.int(n.Content[1], field+" width", lo, hi)
		return engine.Pair{H: h, W: w}, ok1 && ok2
	}
	v, ok := d.int(n, field, lo, hi)
	return engine.Square(v), ok
}

// shape reads [channels, height, width].
func (d *decoder) shape(n *yaml.Node, field string) (engine.Shape, bool) {
	n = d.deref(n, field)
	if n == nil {
		return engine.Shape{}, false
	}
	if n.Kind != yaml.SequenceNode || len(n.Content) != 3 {
		d.fail(n, field, ErrType, "expected [channels, height, width], e.g. [3, 224, 224]; found %s", describe(n))
		return engine.Shape{}, false
	}
	c, ok1 := d.int(n.Content[0], field+" channels", 1, engine.MaxChannels)
	h, ok2 := d.int(n.Content[1], field+" height", 1, engine.MaxSpatial)
	w, ok3 := d.int(n.Content[2], field+" width", 1, engine.MaxSpatial)
	return engine.Shape{C: c, H: h, W: w}, ok1 && ok2 && ok3
}

// TrainingKeys lists the keys of the training section.
func TrainingKeys() []string { return engine.SettingKeys() }

// training reads the training section. Keys, bounds and choices are those
// of engine.Settings; the values are read as YAML scalars of their kind.
func (d *decoder) training(n *yaml.Node) engine.Training {
	var t engine.Training
	settings := engine.Settings()
	for _, kv := range d.mapping(n, "training", "training settings") {
		k, v := kv[0], kv[1]
		field := "training → " + k.Value
		s, ok := settingFor(settings, k.Value)
		if !ok {
			d.unknown(k, "training", TrainingKeys())
			continue
		}
		var err error
		switch s.Kind {
		case engine.SettingCount:
			if c, ok := d.int(v, field, s.Min, s.Max); ok {
				err = s.SetNumber(&t, c)
			}
		case engine.SettingChoice:
			if i, ok := d.choice(v, field, s.Options); ok {
				err = s.SetOption(&t, i)
			}
		case engine.SettingSize:
			err = s.SetNumber(&t, d.size(v, field))
		case engine.SettingShare:
			if sc := d.scalar(v, field, "a share such as 10% or 0.1"); sc != nil {
				h, perr := engine.ParseShare(sc.Value)
				if perr != nil {
					d.fail(sc, field, ErrRange, "%v", perr)
					break
				}
				err = s.SetShare(&t, h)
			}
		case engine.SettingText:
			if sc := d.scalar(v, field, s.Help); sc != nil {
				if perr := s.Parse(&t, sc.Value); perr != nil {
					d.fail(sc, field, ErrRange, "%v", perr)
				}
			}
		}
		if err != nil { // the checks above are the setting's own, so this stays unreached
			d.fail(v, field, ErrRange, "%v", err)
		}
	}
	return t
}

// StageKeys lists the keys of the stage section.
func StageKeys() []string { return engine.StageSettingKeys() }

// stage reads the stage section: the settings of the stage the editor's
// stage key inserts. Keys, bounds and choices are those of
// engine.StageSettings; the values are read as YAML scalars of their kind.
func (d *decoder) stage(n *yaml.Node) engine.Stage {
	var st engine.Stage
	for _, kv := range d.mapping(n, "stage", "stage settings") {
		k, v := kv[0], kv[1]
		field := "stage → " + k.Value
		s, ok := engine.StageSettingFor(k.Value)
		if !ok {
			d.unknown(k, "stage", StageKeys())
			continue
		}
		var text string
		switch s.Kind {
		case engine.SettingCount:
			c, ok := d.int(v, field, s.Min, s.Max)
			if !ok {
				continue
			}
			text = strconv.FormatInt(c, 10)
		case engine.SettingChoice:
			i, ok := d.choice(v, field, s.Options)
			if !ok {
				continue
			}
			text = s.Options[i]
		case engine.SettingFlag:
			b, ok := d.bool(v, field)
			if !ok {
				continue
			}
			text = strconv.FormatBool(b)
		case engine.SettingReal:
			f, ok := d.float(v, field, s.FMin, s.FMax)
			if !ok {
				continue
			}
			text = strconv.FormatFloat(f, 'g', -1, 64)
		}
		if err := s.Parse(&st, text); err != nil {
			var fe *engine.FieldError
			if errors.As(err, &fe) {
				d.fail(v, field, ErrRange, "%s is out of range; %s", text, fe.Want)
			} else {
				d.fail(v, field, ErrRange, "%v", err)
			}
		}
	}
	return st
}

// quiet reads the list of warnings the stack silences, by their names
// (engine.WarningNames): each a warning, once. An empty list is no list.
func (d *decoder) quiet(n *yaml.Node) []engine.Code {
	n = d.deref(n, "quiet")
	if n == nil {
		return nil
	}
	allowed := engine.WarningNames()
	if n.Kind != yaml.SequenceNode {
		d.fail(n, "quiet", ErrType, "expected a list of warning names, e.g. quiet: [%s]; found %s", allowed[0], describe(n))
		return nil
	}
	var out []engine.Code
	seen := map[engine.Code]bool{}
	for _, e := range n.Content {
		sc := d.scalar(e, "quiet", "a warning name")
		if sc == nil {
			continue
		}
		c, ok := engine.WarningByName(sc.Value)
		switch {
		case ok && seen[c]:
			d.fail(sc, "quiet", ErrUnknown, "%q is listed twice; keep one", sc.Value)
		case ok:
			seen[c] = true
			out = append(out, c)
		default:
			if hint := engine.Suggest(sc.Value, allowed); hint != "" {
				d.fail(sc, "quiet", ErrUnknown, "no warning is named %q; did you mean %q? (warnings: %s)", sc.Value, hint, strings.Join(allowed, ", "))
			} else {
				d.fail(sc, "quiet", ErrUnknown, "no warning is named %q (warnings: %s; errors cannot be silenced)", sc.Value, strings.Join(allowed, ", "))
			}
		}
	}
	return out
}

// settingFor finds the setting named key in settings.
func settingFor(settings []engine.Setting, key string) (engine.Setting, bool) {
	for _, s := range settings {
		if s.Key == key {
			return s, true
		}
	}
	return engine.Setting{}, false
}

// size reads a memory size such as 24GiB.
func (d *decoder) size(v *yaml.Node, field string) int64 {
	s := d.scalar(v, field, "a memory size such as 24GiB")
	if s == nil {
		return 0
	}
	b, err := engine.ParseBytes(s.Value)
	if err != nil {
		d.fail(s, field, ErrRange, "%v", err)
		return 0
	}
	return b
}

func names[T fmt.Stringer](xs []T) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = x.String()
	}
	return out
}
