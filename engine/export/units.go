package export

import (
	"bufio"
	"fmt"
	"strings"

	"stackfit/engine"
)

// frame collects the __init__ and forward lines of one use of a unit
// while its body is walked: its names are relative to base, the use's
// repeat path.
type frame struct {
	base      engine.Path
	init, fwd []string
}

// unitClasses are the classes written for units: one per unit, and one
// more for each use whose forward differs from the unit's first (a
// projection shortcut one use needs and another does not, a slice of
// another width), numbered.
type unitClasses struct {
	byUse  map[string]string // repeat path of a use → its class
	byText map[string]string // unit name + forward text → class
	order  []unitClass
}

type unitClass struct {
	name, unit string
	fwd        []string
}

// selfContained reports whether a unit's expansion reads nothing from
// outside it (no merge and no branch from a named output), so that it can
// be a module of its own.
func selfContained(ls []engine.Layer) bool {
	for i := range ls {
		l := &ls[i]
		if l.Kind.IsMerge() || l.Kind == engine.KindBranch && l.From != "" || !selfContained(l.Body) {
			return false
		}
	}
	return true
}

// use writes one repeat of a use of a unit as an instance of the unit's
// class: in __init__ the class called with the body's modules, in forward
// one call. The check walk collects the body's forward lines and picks the
// class (the unit's, or a numbered variant when this use's forward
// differs).
func (g *gen) use(l *engine.Layer, rp engine.Path) {
	id := g.ident(rp)
	f := &frame{base: rp}
	g.frames = append(g.frames, f)
	g.walk(l.Body, rp)
	g.frames = g.frames[:len(g.frames)-1]
	key := rp.String()
	if g.phase == phaseCheck {
		g.units.byUse[key] = g.units.class(l.Unit, f.fwd)
	}
	class := g.units.byUse[key]
	args := make([]string, 0, len(f.init))
	for _, s := range f.init {
		name, expr, ok := strings.Cut(strings.TrimPrefix(s, "self."), " = ")
		if !ok {
			g.fail("unit %s: an __init__ line the export cannot pass on: %q", l.Unit, s)
			return
		}
		args = append(args, name+"="+expr)
	}
	g.initLine(fmt.Sprintf("self.%s = %s(%s)", id, class, strings.Join(args, ", ")))
	g.fwdLine(fmt.Sprintf("x = self.%s(x)", id))
}

// class returns the class for a use of unit with these forward lines.
func (u *unitClasses) class(unit string, fwd []string) string {
	text := unit + "\x00" + strings.Join(fwd, "\n")
	if c, ok := u.byText[text]; ok {
		return c
	}
	name := "Unit" + className(unit)
	n := 0
	for _, c := range u.order {
		if c.unit == unit {
			n++
		}
	}
	if n > 0 {
		name += fmt.Sprint(n + 1)
	}
	u.byText[text] = name
	u.order = append(u.order, unitClass{name: name, unit: unit, fwd: fwd})
	return name
}

// write defines the unit classes, after the model's class (Python looks
// them up when the model is built).
func (u *unitClasses) write(b *bufio.Writer) {
	variants := map[string]int{}
	for _, c := range u.order {
		variants[c.unit]++
	}
	for _, c := range u.order {
		fmt.Fprintf(b, "\n\nclass %s(nn.Module):\n", c.name)
		if n := variants[c.unit]; n > 1 {
			fmt.Fprintf(b, "    \"\"\"Unit %s of the stack file, one of its %d forms: its uses here run\n    this forward (the others differ in repeats or shortcuts); each use\n    passes its own layers.\"\"\"\n\n", readable(c.unit), n)
		} else {
			fmt.Fprintf(b, "    \"\"\"Unit %s of the stack file; each use passes its own layers.\"\"\"\n\n", readable(c.unit))
		}
		b.WriteString("    def __init__(self, **layers):\n        super().__init__()\n")
		b.WriteString("        for name, layer in layers.items():\n            self.add_module(name, layer)\n")
		b.WriteString("\n    def forward(self, x):\n")
		for _, s := range c.fwd {
			b.WriteString("        " + s + "\n")
		}
		b.WriteString("        return x\n")
	}
}

// taken reports whether a unit's class has the name.
func (u *unitClasses) taken(name string) bool {
	for _, c := range u.order {
		if c.name == name {
			return true
		}
	}
	return false
}
