package editor

import (
	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// picker chooses the kind of a new layer.
type picker struct {
	kinds []engine.Kind
	sel   int
}

// kindHelp says in a few words what each kind does.
var kindHelp = map[engine.Kind]string{
	engine.KindConv:       "convolution: filters over a sliding window",
	engine.KindDeconv:     "transposed convolution: upsamples with learned filters",
	engine.KindPool:       "max or average over a window",
	engine.KindGlobalPool: "average or max over the whole map → C×1×1",
	engine.KindPoolTo:     "average pooling to a fixed size",
	engine.KindUpsample:   "repeat or interpolate by an integer factor",
	engine.KindNorm:       "batch, group, instance or layer normalisation",
	engine.KindAct:        "relu, leaky-relu, gelu, silu, sigmoid, tanh",
	engine.KindDropout:    "zero a share of values while training",
	engine.KindFlatten:    "C×H×W → one vector",
	engine.KindDense:      "fully connected layer",
	engine.KindReshape:    "reinterpret values as a new C×H×W",
	engine.KindBlock:      "a group of layers, repeated, optionally residual",
	engine.KindConcat:     "join a named earlier output along the channels",
	engine.KindAdd:        "add a named earlier output",
}

func (m *Model) openPicker() {
	m.picker = &picker{kinds: engine.Kinds()}
	m.mode = modePicker
}

func (m *Model) updatePicker(msg tea.KeyMsg) tea.Cmd {
	p := m.picker
	switch {
	case key.Matches(msg, m.keys.Cancel):
		m.picker, m.mode = nil, modeNormal
		return nil
	case key.Matches(msg, m.keys.Up):
		p.sel = (p.sel - 1 + len(p.kinds)) % len(p.kinds)
	case key.Matches(msg, m.keys.Down):
		p.sel = (p.sel + 1) % len(p.kinds)
	case key.Matches(msg, m.keys.Accept):
		k := p.kinds[p.sel]
		m.picker, m.mode = nil, modeNormal
		cmd := m.insertAfter(engine.NewLayer(k, m.channelsAt()), "added "+k.String())
		if k != engine.KindFlatten {
			m.editLayer()
		}
		return cmd
	default:
		// A letter jumps to the next kind starting with it.
		if r := msg.Runes; len(r) == 1 {
			for i := 1; i <= len(p.kinds); i++ {
				j := (p.sel + i) % len(p.kinds)
				if n := p.kinds[j].String(); n != "" && rune(n[0]) == r[0] {
					p.sel = j
					break
				}
			}
		}
	}
	return nil
}
