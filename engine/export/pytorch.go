// Package export writes a stack as framework code: a self-contained
// PyTorch module whose layers, shapes and parameter count match the
// engine's numbers exactly.
package export

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"stackfit/engine"
)

// ErrExport is wrapped by every export error.
var ErrExport = errors.New("cannot export")

// PyTorch writes a Python module with one nn.Module class for the analysed
// stack. Every tensor inside is N×C×H×W (a dense layer's output is
// N×units×1×1). Names and notes from the stack only ever appear inside
// comments, escaped, or as generated identifiers: nothing from the file
// becomes code.
func PyTorch(w io.Writer, an *engine.Analysis, source string) error {
	r := an.Result
	if r.Errors > 0 {
		return fmt.Errorf("%w: the stack has %d error(s); fix them first (stackfit check shows them)", ErrExport, r.Errors)
	}
	if len(r.Rows) == 0 {
		return fmt.Errorf("%w: the stack has no layers", ErrExport)
	}
	// The walk runs three times: once to find any error before a byte is
	// written, then once for __init__'s lines and once for forward's, each
	// written as it is made, so a module of any size is never held whole.
	// The check walk also finds which named outputs a merge reads and
	// which saved inputs a residual reads (only those get a variable), and
	// which helpers the layers call (only those are defined).
	g := newGen(an, nil, phaseCheck, nil)
	g.walk(an.Stack.Layers, engine.Path{})
	if g.err != nil {
		return g.err
	}
	class := className(an.Stack.Name)
	for g.units.taken(class) {
		class += "Net" // a stack named like one of its units' classes
	}
	b := bufio.NewWriterSize(w, 64<<10)
	var head strings.Builder
	g.header(&head, source)
	b.WriteString(head.String())
	b.WriteString(preludeHead)
	for _, h := range helpers {
		if g.uses[h.name] {
			b.WriteString("\n\n\n" + h.code)
		}
	}
	fmt.Fprintf(b, "\n\n\nclass %s(nn.Module):\n", class)
	fmt.Fprintf(b, "    \"\"\"%s → %s; every tensor is N×C×H×W.\"\"\"\n\n", an.Stack.Input, r.Output)
	b.WriteString("    def __init__(self):\n        super().__init__()\n")
	newGen(an, b, phaseInit, g).walk(an.Stack.Layers, engine.Path{})
	b.WriteString("\n    def forward(self, x):\n")
	newGen(an, b, phaseForward, g).walk(an.Stack.Layers, engine.Path{})
	b.WriteString("        return x\n")
	g.units.write(b)
	fmt.Fprintf(b, "\n\nINPUT_SHAPE = (%d, %d, %d)\nMODEL = %s\n", an.Stack.Input.C, an.Stack.Input.H, an.Stack.Input.W, class)
	writeEstimate(b, an)
	b.WriteString(measureTool)
	return b.Flush()
}

// preludeHead is what every module starts with after its header.
const preludeHead = `
import torch
import torch.nn as nn`

// helper is a class or function the generated class may use; the module
// defines only those its layers call.
type helper struct {
	name string // the Python name, as the generated code calls it
	code string // its definition
}

// helpers are the module's helpers in the order they are written.
var helpers = []helper{
	{"ChannelLayerNorm", `class ChannelLayerNorm(nn.Module):
    """Layer norm over the channels at each position."""

    def __init__(self, channels, affine=True, eps=1e-5):
        super().__init__()
        self.norm = nn.LayerNorm(channels, eps=eps, elementwise_affine=affine)

    def forward(self, x):
        return self.norm(x.permute(0, 2, 3, 1)).permute(0, 3, 1, 2)`},
	{"Dense", `class Dense(nn.Module):
    """A fully connected layer on an N×C×1×1 map, giving N×units×1×1."""

    def __init__(self, features, units, bias=True):
        super().__init__()
        self.fc = nn.Linear(features, units, bias=bias)

    def forward(self, x):
        return self.fc(x.flatten(1))[:, :, None, None]`},
	{"PositionDense", `class PositionDense(nn.Module):
    """A fully connected layer applied at every position of an N×C×H×W map,
    over its channels."""

    def __init__(self, features, units, bias=True):
        super().__init__()
        self.fc = nn.Linear(features, units, bias=bias)

    def forward(self, x):
        return self.fc(x.permute(0, 2, 3, 1)).permute(0, 3, 1, 2)`},
	{"ChannelScale", `class ChannelScale(nn.Module):
    """A learnable factor per channel (layer scale)."""

    def __init__(self, channels, init=1.0):
        super().__init__()
        self.gamma = nn.Parameter(torch.full((channels, 1, 1), float(init)))

    def forward(self, x):
        return x * self.gamma`},
	{"SpatialGate", `class SpatialGate(nn.Module):
    """Scales every position of the map by a gate made from the channels'
    mean and maximum there: a kernel x kernel convolution of the two maps
    to one (padded to keep the size), an optional batch norm, a sigmoid."""

    def __init__(self, kernel=7, bias=True, norm=False):
        super().__init__()
        self.conv = nn.Conv2d(2, 1, kernel, padding=kernel // 2, bias=bias)
        self.norm = nn.BatchNorm2d(1) if norm else nn.Identity()

    def forward(self, x):
        pooled = torch.cat([torch.mean(x, 1, keepdim=True), torch.max(x, 1, keepdim=True)[0]], 1)
        return x * torch.sigmoid(self.norm(self.conv(pooled)))`},
	{"DropPath", `class DropPath(nn.Module):
    """Stochastic depth: zeroes a sample's residual branch with probability p
    while training, scaling the kept ones by 1 / (1 - p)."""

    def __init__(self, p):
        super().__init__()
        self.p = p

    def forward(self, x):
        if not self.training or self.p == 0.0:
            return x
        keep = 1.0 - self.p
        noise = torch.empty([x.shape[0], 1, 1, 1], dtype=x.dtype, device=x.device).bernoulli_(keep)
        return x * noise.div_(keep)`},
	{"center_crop", `def center_crop(x, h, w):
    top, left = (x.shape[2] - h) // 2, (x.shape[3] - w) // 2
    return x[:, :, top:top + h, left:left + w]`},
}

// comment writes text as comment lines, one per line of text, with
// anything unprintable escaped (see readable), so no line of it can become
// code.
func comment(b *strings.Builder, prefix, text string) {
	for _, line := range strings.FieldsFunc(text, func(r rune) bool { return r == '\n' || r == '\r' || r == '\u2028' || r == '\u2029' || r == '\x85' }) {
		b.WriteString(prefix + "# " + readable(line) + "\n")
	}
}

// readable returns text as it may stand inside a one-line Python comment:
// printable characters as they are (quotes and backslashes too, so a name
// reads as written), and everything else — line breaks, tabs, terminal
// and bidirectional controls, invalid UTF-8 — as a Go escape (\n, \t,
// \x1b, \u202e), so no line break or control reaches the file.
func readable(text string) string {
	var b strings.Builder
	for i, w := 0, 0; i < len(text); i += w {
		r, n := utf8.DecodeRuneInString(text[i:])
		w = n
		switch {
		case r == utf8.RuneError && n == 1:
			fmt.Fprintf(&b, "\\x%02x", text[i])
		case r == ' ' || unicode.IsPrint(r):
			b.WriteRune(r)
		default:
			q := strconv.QuoteRuneToASCII(r)
			b.WriteString(q[1 : len(q)-1])
		}
	}
	return b.String()
}

// quoted is a name in double quotes, readable (see readable).
func quoted(name string) string { return `"` + readable(name) + `"` }

func (g *gen) header(b *strings.Builder, source string) {
	an, r := g.an, g.r
	// The source encoding is fixed on line 1 (PEP 263: Python reads a
	// declaration on line 1, or on line 2 after a comment line) and line 2
	// holds no text from the stack, so no name or file name can declare
	// another.
	b.WriteString("# -*- coding: utf-8 -*-\n")
	b.WriteString("# Generated by stackfit. Regenerate rather than edit.\n")
	if source != "" {
		b.WriteString("# from " + quoted(source) + "\n")
	}
	comment(b, "", "stack: "+an.Stack.Name)
	comment(b, "", an.Stack.Note)
	fmt.Fprintf(b, "# input %s -> output %s, %d rows\n", an.Stack.Input, r.Output, len(r.Rows))
	fmt.Fprintf(b, "# parameters %s, buffers %s, MACs per sample %s\n",
		engine.GroupDigits(r.Totals.Params), engine.GroupDigits(r.Totals.Buffers), engine.GroupDigits(r.Totals.MACs))
	m, t := &an.Memory, an.Training
	micro := ""
	if m.MicroBatch != max(t.Batch, 1) {
		micro = fmt.Sprintf(" (micro-batch %d per GPU)", m.MicroBatch)
	}
	fmt.Fprintf(b, "# training memory per GPU (estimate; keep headroom): %s at batch %d%s, %s, %s\n",
		engine.FormatBytes(m.Total), max(t.Batch, 1), micro, t.Precision, t.Optimizer)
}

// className turns a stack name into a Python class name: the name's ASCII
// letters and digits, each word capitalised, with "Net" in front when
// nothing is left or it would start with a digit, and "Net" after when the
// result is a name the module already needs (see reserved).
func className(name string) string {
	var b strings.Builder
	up := true
	for _, r := range name {
		if r < 128 && (unicode.IsLetter(r) || unicode.IsDigit(r)) {
			if up {
				r = unicode.ToUpper(r)
			}
			b.WriteRune(r)
			up = false
		} else {
			up = true
		}
	}
	s := b.String()
	if s == "" || unicode.IsDigit(rune(s[0])) {
		s = "Net" + s
	}
	for reserved(s) {
		s += "Net"
	}
	return s
}

// pythonNames are the names a generated class must not take: Python's
// keywords and soft keywords (Python 3.11's keyword.kwlist and
// keyword.softkwlist, with 3.12's "type"), the names of its builtins
// module (Python 3.11's dir(builtins)), the module attributes Python sets,
// and the names the module defines besides the prelude's: its imports,
// MODEL, INPUT_SHAPE and ESTIMATE (the measuring entry point's functions
// start with a lower-case letter or an underscore, which a class name
// never does).
const pythonNames = `False None True and as assert async await break class continue def del
elif else except finally for from global if import in is lambda nonlocal not or pass raise
return try while with yield _ case match type
ArithmeticError AssertionError AttributeError BaseException BaseExceptionGroup
BlockingIOError BrokenPipeError BufferError BytesWarning ChildProcessError
ConnectionAbortedError ConnectionError ConnectionRefusedError ConnectionResetError
DeprecationWarning EOFError Ellipsis EncodingWarning EnvironmentError Exception
ExceptionGroup FileExistsError FileNotFoundError FloatingPointError FutureWarning
GeneratorExit IOError ImportError ImportWarning IndentationError IndexError
InterruptedError IsADirectoryError KeyError KeyboardInterrupt LookupError MemoryError
ModuleNotFoundError NameError NotADirectoryError NotImplemented NotImplementedError
OSError OverflowError PendingDeprecationWarning PermissionError ProcessLookupError
RecursionError ReferenceError ResourceWarning RuntimeError RuntimeWarning
StopAsyncIteration StopIteration SyntaxError SyntaxWarning SystemError SystemExit
TabError TimeoutError TypeError UnboundLocalError UnicodeDecodeError
UnicodeEncodeError UnicodeError UnicodeTranslateError UnicodeWarning UserWarning
ValueError Warning ZeroDivisionError __build_class__ __debug__ __doc__ __import__
__loader__ __name__ __package__ __spec__ __file__ __cached__ __builtins__
__annotations__ abs aiter all anext any ascii bin bool breakpoint bytearray bytes
callable chr classmethod compile complex copyright credits delattr dict dir divmod
enumerate eval exec exit filter float format frozenset getattr globals hasattr hash
help hex id input int isinstance issubclass iter len license list locals map max
memoryview min next object oct open ord pow print property quit range repr reversed
round set setattr slice sorted staticmethod str sum super tuple type vars zip
torch nn MODEL INPUT_SHAPE ESTIMATE`

// reserved reports whether s is one of pythonNames or the name of a helper
// (any helper, used or not, so a class name does not change with the
// layers).
func reserved(s string) bool {
	for _, n := range strings.Fields(pythonNames) {
		if n == s {
			return true
		}
	}
	for _, h := range helpers {
		if h.name == s {
			return true
		}
	}
	return false
}

// phase says which of the class's two methods a walk writes.
type phase int

const (
	phaseCheck   phase = iota // write nothing; find errors
	phaseInit                 // write __init__'s lines
	phaseForward              // write forward's lines
)

// gen makes the __init__ and forward lines, consuming rows in order, and
// writes those of its phase.
type gen struct {
	an    *engine.Analysis
	r     *engine.Result
	next  int // next row to emit
	out   *bufio.Writer
	phase phase
	taps  map[string]string // layer name → Python variable
	err   error

	// Filled by the check walk and shared with the writing ones: the
	// names a merge reads and the saved inputs (r… variables) a residual
	// or dense link reads, the only ones kept in a variable; and the
	// helpers the generated lines call.
	read, keep, uses map[string]bool
	// units: the class of each use of a unit written as one (by the use's
	// repeat path), and the classes in the order made (check walk).
	units *unitClasses
	// frames: the uses being written into their classes, innermost last.
	frames []*frame
}

// newGen makes a walk of phase ph; a writing walk takes what the check
// walk found.
func newGen(an *engine.Analysis, out *bufio.Writer, ph phase, check *gen) *gen {
	g := &gen{an: an, r: an.Result, out: out, phase: ph, taps: map[string]string{}}
	if check != nil {
		g.read, g.keep, g.uses, g.units = check.read, check.keep, check.uses, check.units
	} else {
		g.read, g.keep, g.uses = map[string]bool{}, map[string]bool{}, map[string]bool{}
		g.units = &unitClasses{byUse: map[string]string{}, byText: map[string]string{}}
	}
	return g
}

// save writes "v = x" where a later line reads v (every time in the check
// walk, which finds that out).
func (g *gen) save(v string) {
	if g.phase == phaseCheck || g.keep[v] {
		g.fwdLine(v + " = x")
	}
}

// reads marks the saved input v as read.
func (g *gen) reads(v string) {
	if g.phase == phaseCheck {
		g.keep[v] = true
	}
}

// initLine writes one line of __init__ in the init phase.
func (g *gen) initLine(s string) {
	if n := len(g.frames); n > 0 {
		f := g.frames[n-1]
		f.init = append(f.init, s)
		if g.phase == phaseCheck {
			g.noteHelpers(s)
		}
		return
	}
	switch g.phase {
	case phaseInit:
		g.out.WriteString("        " + s + "\n")
	case phaseCheck:
		g.noteHelpers(s)
	}
}

// fwdLine writes lines of forward in the forward phase.
func (g *gen) fwdLine(lines ...string) {
	for _, s := range lines {
		if n := len(g.frames); n > 0 {
			f := g.frames[n-1]
			f.fwd = append(f.fwd, s)
			if g.phase == phaseCheck {
				g.noteHelpers(s)
			}
			continue
		}
		switch g.phase {
		case phaseForward:
			g.out.WriteString("        " + s + "\n")
		case phaseCheck:
			g.noteHelpers(s)
		}
	}
}

// noteHelpers records the helpers a generated line calls. Comment lines
// (which hold names from the stack) are skipped.
func (g *gen) noteHelpers(line string) {
	if strings.HasPrefix(line, "#") {
		return
	}
	for _, h := range helpers {
		for rest := line; ; {
			i := strings.Index(rest, h.name+"(")
			if i < 0 {
				break
			}
			if i == 0 || !isIdentByte(rest[i-1]) {
				g.uses[h.name] = true
				break
			}
			rest = rest[i+len(h.name):]
		}
	}
}

// isIdentByte reports whether c may be part of an ASCII Python identifier.
func isIdentByte(c byte) bool {
	return c == '_' || c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z'
}

// named writes the lines after an item with a name: a comment naming it,
// and, when a merge reads it, the variable that keeps it.
func (g *gen) named(name string) {
	if name == "" {
		return
	}
	if g.phase == phaseCheck {
		g.tap(name) // every name, to find a merge reading an unknown one
	}
	if !g.read[name] {
		g.fwdLine("# output of " + quoted(name))
		return
	}
	g.fwdLine("# output of "+quoted(name), g.tap(name)+" = x")
}

// ident is the Python name of path p's module or variable: relative to
// the use of a unit being written into its class, if any.
func (g *gen) ident(p engine.Path) string {
	if n := len(g.frames); n > 0 {
		segs := strings.Split(p.String(), ".")
		return "l" + strings.Join(segs[min(g.frames[n-1].base.Len(), len(segs)):], "_")
	}
	return "l" + strings.NewReplacer(".", "_").Replace(p.String())
}

// tap returns the variable holding a named output, creating it.
func (g *gen) tap(name string) string {
	if v, ok := g.taps[name]; ok {
		return v
	}
	v := fmt.Sprintf("t%d", len(g.taps))
	g.taps[name] = v
	return v
}

func (g *gen) fail(format string, args ...any) {
	if g.err == nil {
		g.err = fmt.Errorf("%w: "+format, append([]any{ErrExport}, args...)...)
	}
}

// walk emits the items of ls, mirroring the engine's evaluation order.
func (g *gen) walk(ls []engine.Layer, parent engine.Path) {
	for i := range ls {
		l := &ls[i]
		p := parent.Append(i + 1)
		switch l.Kind {
		case engine.KindGate:
			gp := p.Append(1)
			saved := "g" + strings.TrimPrefix(g.ident(gp), "l")
			g.fwdLine(saved + " = x")
			g.walk(l.Body, gp) // x becomes the gate
			if g.next >= len(g.r.Rows) || g.r.Rows[g.next].Role != engine.RoleGate {
				g.fail("gate rows out of order near row %d", g.next+1)
				return
			}
			g.next++
			g.fwdLine("x = " + saved + " * x")
		case engine.KindFork:
			g.fork(l, p)
		case engine.KindBlock:
			for rep := 1; rep <= int(max(l.Repeat, 1)); rep++ {
				rp := p.Append(rep)
				if l.Unit != "" && selfContained(l.Body) {
					g.use(l, rp)
					continue
				}
				saved := ""
				if l.Residual || l.DenseLinks {
					saved = "r" + strings.TrimPrefix(g.ident(rp), "l")
					g.save(saved)
				}
				g.walk(l.Body, rp)
				if l.Residual {
					g.residual(saved)
				}
				if l.DenseLinks {
					if g.next >= len(g.r.Rows) || g.r.Rows[g.next].Role != engine.RoleDenseCat {
						g.fail("dense-link rows out of order near row %d", g.next+1)
						return
					}
					g.next++
					g.reads(saved)
					g.fwdLine("x = torch.cat([" + saved + ", x], 1)") // the repeat's input first, as DenseNet orders them
				}
			}
		default:
			g.row()
		}
		g.named(l.Name)
	}
}

// fork emits a fork: each branch from the saved input (its share of the
// channels, or the named output it starts from), then the join of the
// branches' outputs (their concatenation or their sum).
func (g *gen) fork(l *engine.Layer, p engine.Path) {
	base := strings.TrimPrefix(g.ident(p), "l")
	in := "f" + base
	g.fwdLine(in + " = x")
	outs := make([]string, 0, len(l.Body))
	for b := range l.Body {
		br := &l.Body[b]
		if br.Kind != engine.KindBranch {
			g.fail("layer %s is not a branch", p.Append(b+1))
			return
		}
		src := in
		switch {
		case br.From != "":
			// A branch from a named earlier output reads its variable.
			if g.phase == phaseCheck {
				g.read[br.From] = true
			}
			v, ok := g.taps[br.From]
			if !ok {
				g.fail("branch %s starts from an unknown output", p.Append(b+1))
				return
			}
			src = v
		case l.Split:
			src = fmt.Sprintf("%s.chunk(%d, 1)[%d]", in, len(l.Body), b)
		}
		g.fwdLine("x = " + src)
		g.walk(br.Body, p.Append(b+1))
		out := fmt.Sprintf("b%s_%d", base, b+1)
		g.fwdLine(out + " = x")
		g.named(br.Name)
		outs = append(outs, out)
	}
	if g.next >= len(g.r.Rows) || g.r.Rows[g.next].Role != engine.RoleJoin {
		g.fail("fork rows out of order near row %d", g.next+1)
		return
	}
	g.next++
	g.fwdLine("x = " + engine.JoinExpr(l, outs))
}

// residual emits the shortcut rows, the addition and the activation that
// close one repeat.
func (g *gen) residual(saved string) {
	sc := saved
	for g.next < len(g.r.Rows) && g.r.Rows[g.next].Role == engine.RoleShortcut {
		row := &g.r.Rows[g.next]
		g.next++
		id := g.ident(row.Path)
		g.initLine(fmt.Sprintf("self.%s = %s", id, g.module(row)))
		g.reads(sc)
		g.fwdLine(fmt.Sprintf("sc = self.%s(%s)", id, sc))
		sc = "sc"
	}
	switch {
	case g.next < len(g.r.Rows) && g.r.Rows[g.next].Role == engine.RoleResidual:
		row := &g.r.Rows[g.next]
		g.next++
		body := "x"
		if rate := row.Layer.Rate; rate > 0 {
			id := g.ident(row.Path)
			g.initLine(fmt.Sprintf("self.%s = DropPath(%s)", id, strconv.FormatFloat(rate, 'g', -1, 64)))
			body = fmt.Sprintf("self.%s(x)", id)
		}
		g.reads(sc)
		g.fwdLine("x = " + body + " + " + sc)
	case sc == saved:
		// An identity-only residual whose shapes differ: no addition.
	default:
		g.fail("residual rows out of order near row %d", g.next+1)
		return
	}
	if g.next < len(g.r.Rows) && g.r.Rows[g.next].Role == engine.RolePostAct {
		row := &g.r.Rows[g.next]
		g.next++
		id := g.ident(row.Path)
		g.initLine(fmt.Sprintf("self.%s = %s", id, g.module(row)))
		g.fwdLine(fmt.Sprintf("x = self.%s(x)", id))
	}
}

// row emits the next row by its kind's PyTorch form: a module in __init__
// and its call in forward, or an expression of x in forward.
func (g *gen) row() {
	if g.next >= len(g.r.Rows) {
		g.fail("more layers than rows")
		return
	}
	row := &g.r.Rows[g.next]
	g.next++
	t, ok := engine.SpecOf(row.Layer.Kind).Torch(row)
	if !ok || t.Module == "" && t.Expr == "" {
		g.fail("layer %s (%s) has no PyTorch form", row.Path, row.Layer.Kind)
		return
	}
	id := g.ident(row.Path)
	if t.Expr != "" {
		if strings.Contains(t.Expr, engine.OtherVar) {
			if g.phase == phaseCheck {
				g.read[row.Layer.From] = true
			}
			other, ok := g.taps[row.Layer.From]
			if !ok {
				g.fail("row %s merges an unknown output", row.Path)
				return
			}
			t.Expr = strings.ReplaceAll(t.Expr, engine.OtherVar, other)
		}
		g.fwdLine("x = " + t.Expr)
		return
	}
	if t.Pad != "" {
		g.initLine(fmt.Sprintf("self.%s_pad = %s", id, t.Pad))
		g.fwdLine(fmt.Sprintf("x = self.%s_pad(x)", id))
	}
	g.initLine(fmt.Sprintf("self.%s = %s", id, t.Module))
	g.fwdLine(fmt.Sprintf("x = self.%s(x)", id))
}

// module writes the constructor of a row the residual block adds.
func (g *gen) module(row *engine.Row) string {
	t, ok := engine.SpecOf(row.Layer.Kind).Torch(row)
	if !ok || t.Module == "" {
		g.fail("layer %s (%s) has no PyTorch form", row.Path, row.Layer.Kind)
		return "None"
	}
	return t.Module
}
