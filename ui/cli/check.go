package cli

import (
	"fmt"
	"io"
	"strings"

	"stackfit/engine"
	"stackfit/engine/export"
	"stackfit/engine/textsafe"
)

func runCheck(args []string, std IO) int {
	c := newCommand("check", std)
	strict := c.fs.Bool("strict", false, "")
	if code, stop := c.parse(args); stop {
		return code
	}
	an, err := c.analyze()
	if err != nil {
		return c.fail(err)
	}
	r, m := an.Result, &an.Memory
	name := textsafe.Line(c.file) // every line starts with it, terminal-safe
	if name == "-" {
		name = "<stdin>"
	}
	for _, d := range r.Diags {
		if d.Severity == engine.SevInfo {
			continue
		}
		fmt.Fprintf(std.Out, "%s: %s: %s\n", name, d.Severity, textsafe.Line(r.Describe(d)))
	}
	if q := an.Stack.Quiet; len(q) > 0 {
		names := make([]string, len(q))
		for i, c := range q {
			names[i] = c.Name()
		}
		fmt.Fprintf(std.Out, "%s: silenced by the file's quiet: list: %s\n", name, strings.Join(names, ", "))
	}
	status := ExitOK
	if r.Errors > 0 || (*strict && r.Warnings > 0) {
		status = ExitProblems
	}
	switch {
	case !m.Estimated:
		fmt.Fprintf(std.Out, "%s: memory: not estimated: %s\n", name, m.Reason())
	case m.Budget == 0 && an.Stack.Training.Budget > 0:
		fmt.Fprintf(std.Out, "%s: memory: %s per GPU at batch %d (estimate); not checked: --budget none removes the file's budget of %s\n",
			name, engine.FormatBytes(m.Total), max(an.Training.Batch, 1), engine.FormatBytes(an.Stack.Training.Budget))
	case m.Budget == 0:
		fmt.Fprintf(std.Out, "%s: memory: %s per GPU at batch %d (estimate); no budget to check against (--budget SIZE or auto)\n",
			name, engine.FormatBytes(m.Total), max(an.Training.Batch, 1))
	case m.Fits:
		fmt.Fprintf(std.Out, "%s: memory: fits: %s of %s per GPU with %s kept free, at batch %d (estimate)\n",
			name, engine.FormatBytes(m.Total), engine.FormatBytes(m.Budget), engine.FormatShare(an.Training.HeadroomShare()), max(an.Training.Batch, 1))
	default:
		fmt.Fprintf(std.Out, "%s: memory: does not fit: %s of %s per GPU with %s kept free, at batch %d (estimate); largest category %s; largest batch that fits %d\n",
			name, engine.FormatBytes(m.Total), engine.FormatBytes(m.Budget), engine.FormatShare(an.Training.HeadroomShare()),
			max(an.Training.Batch, 1), m.Largest(), an.Fit.MaxBatch)
		status = ExitProblems
	}
	if m.Estimated {
		fmt.Fprintf(std.Out, "%s: memory: the step peaks in %s\n", name, m.PeakWhere(r))
	}
	fmt.Fprintf(std.Out, "%s: %d error(s), %d warning(s)\n", name, r.Errors, r.Warnings)
	return status
}

func runExport(args []string, std IO) int {
	c := newCommand("export", std)
	to := c.fs.String("to", "pytorch", "")
	out := c.fs.String("o", "", "")
	if code, stop := c.parse(args); stop {
		return code
	}
	if *to != "pytorch" {
		fmt.Fprintf(std.Err, "stackfit export: --to %q is not supported; use --to pytorch\n", *to)
		return ExitUsage
	}
	an, err := c.analyze()
	if err != nil {
		return c.fail(err)
	}
	if an.Result.Errors > 0 {
		fmt.Fprintf(std.Err, "stackfit export: the stack has %d error(s); stackfit check %s lists them\n", an.Result.Errors, textsafe.Line(c.file))
		return ExitProblems
	}
	if err := c.output(*out, func(w io.Writer) error { return export.PyTorch(w, an, c.file) }); err != nil {
		return c.fail(err)
	}
	return ExitOK
}
