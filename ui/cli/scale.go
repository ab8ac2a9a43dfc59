package cli

import (
	"context"
	"flag"
	"fmt"
	"math"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/stackfile"
	"stackfit/engine/textsafe"
	"stackfit/ui/store"
)

// scaleUsage is the scale command's help (without the training flags).
const scaleUsage = `usage: stackfit scale FILE [flags]

Writes a scaled copy of a stack: wider, deeper or at another input size,
or all three at once by compound scaling (Tan & Le 2019, "EfficientNet",
eq. 3: depth alpha^phi, width beta^phi, resolution gamma^phi). FILE itself
is never changed. Or, with --max, finds the largest scaling whose variant
fits the memory budget at the batch asked (a training-memory estimate).

  --width F       multiply every absolute width (filters, units) by F,
                  rounded as torchvision's mobile models round: to the
                  nearest multiple of 8, never below 8 nor 10% below the
                  exact value; relative widths (x6, /4) follow their inputs
                  and the last weighted layer (the classes) keeps its width
                  e.g. --width 1.1
  --depth F       each block of N repeats gets ceil(N·F)   e.g. --depth 1.2
  --input N       set the input's height and width: N or HxW
                  e.g. --input 260 or --input 240x320
  --resolution F  multiply the input's height and width by F, each rounded
                  to the nearest whole number   e.g. --resolution 1.15
  --phi F         compound scaling: depth alpha^F, width beta^F,
                  resolution gamma^F (F may be negative)   e.g. --phi 1
  --alpha A       compound depth base (default 1.2)
  --beta B        compound width base (default 1.1)
  --gamma G       compound resolution base (default 1.15)
  --divisor N     round widths to multiples of N instead of 8   e.g. --divisor 4
  --max WHAT      find the largest phi, width, depth or resolution whose
                  variant fits --budget at --batch (the file's training
                  section otherwise), to 0.01, by bisection; the other
                  flags apply first                        e.g. --max phi
  -o FILE         write the scaled stack file to FILE (refused if FILE
                  exists); without -o it goes to standard output (with
                  --max, only the answer is printed)

examples:
  stackfit scale efficientnet-b0.yaml --width 1.1 --depth 1.2 --input 260 \
    -o b2.yaml
  stackfit scale net.yaml --phi 1 -o net-phi1.yaml
  stackfit scale net.yaml --max phi --budget 24GiB --batch 64
  stackfit scale net.yaml --max width --budget 80GiB --batch 256 -o wide.yaml
`

// scaleFlags are the scale command's own flags, as given.
type scaleFlags struct {
	width, depth, input, resolution, phi, alpha, beta, gamma, divisor, max *string
}

// positive reads a flag's factor: a finite number above 0 (any finite
// number when signed).
func positive(name, v string, signed bool) (float64, error) {
	f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
	if err != nil || math.IsNaN(f) || math.IsInf(f, 0) || (!signed && f <= 0) {
		if signed {
			return 0, fmt.Errorf("--%s %q: give a number such as 1 or -0.5", name, v)
		}
		return 0, fmt.Errorf("--%s %q: give a number above 0 such as 1.1", name, v)
	}
	return f, nil
}

// inputSize reads --input: N or HxW.
func inputSize(v string) (engine.Pair, error) {
	t := strings.ToLower(strings.TrimSpace(v))
	h, w, two := strings.Cut(strings.ReplaceAll(t, "×", "x"), "x")
	if !two {
		w = h
	}
	hn, err1 := strconv.ParseInt(strings.TrimSpace(h), 10, 64)
	wn, err2 := strconv.ParseInt(strings.TrimSpace(w), 10, 64)
	if err1 != nil || err2 != nil || hn < 1 || wn < 1 || hn > engine.MaxSpatial || wn > engine.MaxSpatial {
		return engine.Pair{}, fmt.Errorf("--input %q: give the height and width as N or HxW, from 1 to %d, e.g. 260 or 240x320", v, engine.MaxSpatial)
	}
	return engine.Pair{H: hn, W: wn}, nil
}

// scaling builds the fixed scaling, the compound constants and the
// searched axis from the flags given.
func (sf scaleFlags) scaling(given map[string]bool) (engine.Scaling, engine.Compound, engine.Axis, bool, error) {
	var sc engine.Scaling
	c := engine.DefaultCompound()
	var err error
	num := func(name string, p *string, dst *float64, signed bool) {
		if err == nil && given[name] {
			*dst, err = positive(name, *p, signed)
		}
	}
	num("width", sf.width, &sc.Width, false)
	num("depth", sf.depth, &sc.Depth, false)
	num("resolution", sf.resolution, &sc.Resolution, false)
	num("alpha", sf.alpha, &c.Alpha, false)
	num("beta", sf.beta, &c.Beta, false)
	num("gamma", sf.gamma, &c.Gamma, false)
	var phi float64
	num("phi", sf.phi, &phi, true)
	if err == nil && given["input"] {
		sc.Size, err = inputSize(*sf.input)
	}
	if err == nil && given["divisor"] {
		n, perr := strconv.ParseInt(strings.TrimSpace(*sf.divisor), 10, 64)
		if perr != nil || n < 1 || n > 1024 {
			err = fmt.Errorf("--divisor %q: give a whole number from 1 to 1024, e.g. 8", *sf.divisor)
		}
		sc.Divisor = n
	}
	if err != nil {
		return sc, c, 0, false, err
	}
	conflict := func(a, b string) error {
		if given[a] && given[b] {
			return fmt.Errorf("--%s and --%s both set the %s; give one", a, b, map[string]string{"input": "input size", "width": "width", "depth": "depth", "resolution": "input size"}[b])
		}
		return nil
	}
	for _, p := range [][2]string{{"input", "resolution"}, {"phi", "width"}, {"phi", "depth"}, {"phi", "resolution"}, {"phi", "input"}} {
		if err := conflict(p[0], p[1]); err != nil {
			return sc, c, 0, false, err
		}
	}
	if given["phi"] {
		at := c.At(phi)
		sc.Width, sc.Depth, sc.Resolution = at.Width, at.Depth, at.Resolution
	}
	var axis engine.Axis
	search := given["max"]
	if search {
		m := strings.ToLower(strings.TrimSpace(*sf.max))
		found := false
		for _, x := range []engine.Axis{engine.AxisCompound, engine.AxisWidth, engine.AxisDepth, engine.AxisResolution} {
			if m == x.String() {
				axis, found = x, true
			}
		}
		if !found {
			return sc, c, 0, false, fmt.Errorf("--max %q: give phi, width, depth or resolution", *sf.max)
		}
		clash := map[engine.Axis][]string{
			engine.AxisCompound:   {"phi", "width", "depth", "resolution", "input"},
			engine.AxisWidth:      {"width", "phi"},
			engine.AxisDepth:      {"depth", "phi"},
			engine.AxisResolution: {"resolution", "input", "phi"},
		}[axis]
		for _, name := range clash {
			if given[name] {
				return sc, c, 0, false, fmt.Errorf("--max %s searches what --%s sets; leave one out", m, name)
			}
		}
	} else if sc.IsZero() {
		return sc, c, 0, false, fmt.Errorf("give what to scale: --width, --depth, --input, --resolution or --phi (or --max to search); e.g. --phi 1")
	}
	return sc, c, axis, search, nil
}

// describe writes a scaling as "width ×1.1, depth ×1.2, input 3×260×260".
func describe(sc engine.Scaling, in engine.Shape) string {
	var parts []string
	g := func(f float64) string { return strconv.FormatFloat(f, 'g', 4, 64) }
	if sc.Width != 0 {
		parts = append(parts, "width ×"+g(sc.Width))
	}
	if sc.Depth != 0 {
		parts = append(parts, "depth ×"+g(sc.Depth))
	}
	if sc.Size != (engine.Pair{}) || sc.Resolution != 0 {
		parts = append(parts, fmt.Sprintf("input %d×%d×%d", in.C, in.H, in.W))
	}
	return strings.Join(parts, ", ")
}

// runScale writes a scaled copy of a stack, or finds the largest scaling
// that fits.
func runScale(args []string, std IO) int {
	c := newCommand("scale", std)
	sf := scaleFlags{}
	for _, p := range []struct {
		name string
		dst  **string
	}{{"width", &sf.width}, {"depth", &sf.depth}, {"input", &sf.input}, {"resolution", &sf.resolution},
		{"phi", &sf.phi}, {"alpha", &sf.alpha}, {"beta", &sf.beta}, {"gamma", &sf.gamma},
		{"divisor", &sf.divisor}, {"max", &sf.max}} {
		*p.dst = c.fs.String(p.name, "", "")
	}
	out := c.fs.String("o", "", "")
	if code, stop := c.parse(args); stop {
		return code
	}
	given := map[string]bool{}
	c.fs.Visit(func(f *flag.Flag) { given[f.Name] = true })
	sc, comp, axis, search, err := sf.scaling(given)
	if err != nil {
		return c.fail(err)
	}
	if outputTaken("scale", *out, std) {
		return ExitUsage
	}
	s, err := load(c.file, std.In)
	if err != nil {
		return c.fail(err)
	}
	t, err := c.tf.apply(s.Training)
	if err != nil {
		return c.fail(err)
	}
	v := s
	if !sc.IsZero() {
		if v, err = engine.Scale(s, sc); err != nil {
			return c.fail(flagError(err))
		}
	}
	answer, answerPart, budgetAt := "", "", ""
	if search {
		if t.Budget <= 0 {
			return c.fail(fmt.Errorf("--max %s needs a memory budget per GPU: give --budget, e.g. --budget 24GiB (or set budget in the file's training section)", axis))
		}
		f, err := engine.MaxScale(context.Background(), v, t, engine.DefaultAssumptions(), axis, comp)
		if err != nil {
			return c.fail(flagError(err))
		}
		at := fmt.Sprintf("%s per GPU at batch %d", engine.FormatBytes(t.Budget), max(t.Batch, 1))
		if !f.Fits {
			why := "the estimate is over the budget (largest part: " + f.Limit + ")"
			if f.Broken || f.Limit == "" {
				why = "the variant has errors"
			}
			lo := map[engine.Axis]string{engine.AxisCompound: "phi -8"}[axis]
			if lo == "" {
				lo = axis.String() + " ×0.01"
			}
			fmt.Fprintf(std.Out, "nothing fits %s: even at %s %s (memory is an estimate)\n", at, lo, why)
			return ExitProblems
		}
		if v, err = engine.Scale(v, f.Scaling); err != nil {
			return c.fail(err)
		}
		name := axis.String()
		if axis != engine.AxisCompound {
			name += " ×"
		} else {
			name += " = "
		}
		answerPart = name + strconv.FormatFloat(f.Value, 'f', 2, 64) + " (" + describe(f.Scaling, v.Input) + ")"
		budgetAt = at + " (estimate)"
		answer = fmt.Sprintf("largest %s that fits %s: %s%s (to 0.01; %s)", axis, at, name, strconv.FormatFloat(f.Value, 'f', 2, 64), describe(f.Scaling, v.Input))
		switch {
		case !f.Bounded:
			answer += "; the search stops there, and even that fits"
		case f.Broken:
			answer += "; 0.01 more gives a variant with errors"
		default:
			answer += "; 0.01 more is stopped by " + f.Limit
		}
		answer += " — memory is an estimate"
	}
	var how []string
	if d := describe(sc, v.Input); d != "" {
		how = append(how, d)
	}
	if search {
		how = append(how, "the largest "+answerPart+" that fits "+budgetAt)
	}
	note := "scaled by stackfit scale: " + strings.Join(how, "; then ")
	if why, ok := engine.UnitsWrittenOut(s, v); ok {
		note += "; " + why
		fmt.Fprintln(std.Err, "stackfit scale: "+why)
	}
	if v.Note != "" {
		note = v.Note + "\n" + note
	}
	if len(note) <= engine.MaxNoteLen {
		v.Note = note
	}
	data, err := stackfile.Save(v)
	if err == nil {
		_, err = stackfile.Load(data) // the copy must load back
	}
	if err != nil {
		return c.fail(err)
	}
	switch {
	case *out == "" && search:
		fmt.Fprintln(std.Out, answer)
		return ExitOK
	case *out == "":
		if _, err := std.Out.Write(data); err != nil {
			return ExitUsage
		}
		return ExitOK
	}
	if err := store.WriteFileAtomic(*out, data, 0o644); err != nil {
		return c.fail(err)
	}
	if answer != "" {
		fmt.Fprintln(std.Out, answer)
	}
	r := engine.Evaluate(v)
	fmt.Fprintf(std.Out, "wrote %s: %s parameters, %s MACs, %d error(s); check it with: stackfit check %s\n",
		textsafe.Line(*out), engine.GroupDigits(r.Totals.Params), engine.GroupDigits(r.Totals.MACs), r.Errors, textsafe.Line(*out))
	if r.Errors > 0 {
		return ExitProblems
	}
	return ExitOK
}

// flagError turns an engine transform error into one that names the flag.
func flagError(err error) error {
	msg := err.Error()
	for _, p := range [][2]string{{"width factor", "--width"}, {"depth factor", "--depth"}, {"resolution factor", "--resolution"}, {"input size", "--input"}} {
		if strings.Contains(msg, p[0]) {
			return fmt.Errorf("%s: %w", p[1], err)
		}
	}
	return err
}
