package stackfile

import (
	"bytes"
	"fmt"
	"io"
	"strconv"

	"gopkg.in/yaml.v3"

	"stackfit/engine"
)

// Save writes the canonical stack-file form of s: keys in a fixed order,
// fields at their defaults left out, [h, w] pairs written as one number when
// square.
func Save(s *engine.Stack) ([]byte, error) {
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
	put(root, "layers", layerSeq(s.Layers))

	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(&yaml.Node{Kind: yaml.DocumentNode, Content: []*yaml.Node{root}}); err != nil {
		return nil, fmt.Errorf("encode stack: %w", err)
	}
	if err := enc.Close(); err != nil {
		return nil, fmt.Errorf("encode stack: %w", err)
	}
	return buf.Bytes(), nil
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

func training(t engine.Training) *yaml.Node {
	m := &yaml.Node{Kind: yaml.MappingNode}
	if t.Batch != 0 {
		put(m, "batch", intNode(t.Batch))
	}
	if t.Precision != engine.FP32 {
		put(m, "precision", strNode(t.Precision.String()))
	}
	if t.Optimizer != engine.SGD {
		put(m, "optimizer", strNode(t.Optimizer.String()))
	}
	if t.Budget != 0 {
		put(m, "budget", strNode(engine.FormatBytesExact(t.Budget)))
	}
	if t.GPUs > 1 {
		put(m, "gpus", intNode(t.GPUs))
	}
	if t.Shard != engine.ShardNone {
		put(m, "shard", strNode(t.Shard.String()))
	}
	if t.Accumulate > 1 {
		put(m, "accumulate", intNode(t.Accumulate))
	}
	if t.Checkpoint > 0 {
		put(m, "checkpoint", intNode(t.Checkpoint))
	}
	if t.Workspace != 0 {
		put(m, "workspace", strNode(engine.FormatBytesExact(t.Workspace)))
	}
	if t.Overhead != 0 {
		put(m, "overhead", strNode(engine.FormatBytesExact(t.Overhead)))
	}
	if t.HeadroomSet {
		put(m, "headroom", strNode(engine.FormatShare(t.Headroom)))
	}
	if len(m.Content) == 0 {
		return nil
	}
	return m
}

// layerNode writes one layer item, kind key first.
func layerNode(l *engine.Layer) *yaml.Node {
	if l.Kind == engine.KindFlatten && l.Name == "" && l.Note == "" {
		return strNode("flatten")
	}
	m := &yaml.Node{Kind: yaml.MappingNode}
	k := l.Kind.String()
	switch l.Kind {
	case engine.KindConv, engine.KindDeconv, engine.KindDense:
		put(m, k, intNode(l.Filters))
	case engine.KindPool, engine.KindGlobalPool:
		put(m, k, strNode(l.Pool.String()))
	case engine.KindPoolTo:
		put(m, k, pairNode(l.Size))
	case engine.KindUpsample:
		put(m, k, pairNode(l.Factor))
	case engine.KindNorm:
		put(m, k, strNode(l.Norm.String()))
	case engine.KindAct:
		put(m, k, strNode(l.Act.String()))
	case engine.KindDropout:
		put(m, k, floatNode(l.Rate))
	case engine.KindFlatten:
		put(m, k, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!null", Value: ""})
	case engine.KindReshape:
		put(m, k, flowSeq(intNode(l.Target.C), intNode(l.Target.H), intNode(l.Target.W)))
	case engine.KindBlock:
		put(m, k, intNode(max(l.Repeat, 1)))
	case engine.KindConcat, engine.KindAdd:
		put(m, k, strNode(l.From))
	}
	switch l.Kind {
	case engine.KindConv, engine.KindDeconv, engine.KindPool:
		put(m, "kernel", pairNode(l.Kernel))
		if !l.Stride.IsZero() && (l.Kind == engine.KindPool && l.Stride != l.Kernel || l.Kind != engine.KindPool && l.Stride != engine.Square(1)) {
			put(m, "stride", pairNode(l.Stride))
		}
		switch {
		case l.Pad.Mode == engine.PadSame:
			put(m, "pad", strNode("same"))
		case l.Pad.Mode == engine.PadValid:
			put(m, "pad", strNode("valid"))
		case !l.Pad.Size.IsZero():
			put(m, "pad", pairNode(l.Pad.Size))
		}
	}
	switch l.Kind {
	case engine.KindConv, engine.KindDeconv:
		if !l.Dilation.IsZero() && l.Dilation != engine.Square(1) {
			put(m, "dilation", pairNode(l.Dilation))
		}
		if l.Depthwise {
			put(m, "groups", strNode("depthwise"))
		} else if l.Groups > 1 {
			put(m, "groups", intNode(l.Groups))
		}
		if l.Kind == engine.KindDeconv && !l.OutPad.IsZero() {
			put(m, "out-pad", pairNode(l.OutPad))
		}
	case engine.KindPool:
		if l.Ceil {
			put(m, "ceil", boolNode(true))
		}
	case engine.KindUpsample:
		if l.Upsample != engine.UpNearest {
			put(m, "mode", strNode(l.Upsample.String()))
		}
	case engine.KindNorm:
		if l.Norm == engine.NormGroup {
			put(m, "groups", intNode(l.NormGroups))
		}
		if l.Affine != engine.Unset {
			put(m, "affine", boolNode(l.Affine == engine.On))
		}
	case engine.KindAct:
		if l.Act == engine.ActLeakyReLU && l.Slope != 0 {
			put(m, "slope", floatNode(l.Slope))
		}
	}
	if l.Kind.HasWeights() && l.NoBias {
		put(m, "bias", boolNode(false))
	}
	if l.Kind.IsMerge() && l.Crop {
		put(m, "crop", boolNode(true))
	}
	if l.Name != "" {
		put(m, "name", strNode(l.Name))
	}
	if l.Note != "" {
		put(m, "note", strNode(l.Note))
	}
	if l.Kind == engine.KindBlock {
		if l.Residual {
			put(m, "residual", boolNode(true))
			if l.NoShortcutNorm {
				put(m, "shortcut-norm", boolNode(false))
			}
			if l.HasPostAct {
				put(m, "after", strNode(l.PostAct.String()))
			}
		}
		if l.AllStrides {
			put(m, "strides", strNode("all"))
		}
		put(m, "layers", layerSeq(l.Body))
		return m
	}
	if l.Note == "" {
		m.Style = yaml.FlowStyle
	}
	return m
}

// readLimited reads r to the end, failing once more than limit bytes come.
func readLimited(r io.Reader, limit int64) ([]byte, error) {
	data, err := io.ReadAll(io.LimitReader(r, limit+1))
	if err != nil {
		return nil, err
	}
	if int64(len(data)) > limit {
		return nil, fmt.Errorf("%w: over %d bytes (8 MiB)", ErrTooLarge, limit)
	}
	return data, nil
}
