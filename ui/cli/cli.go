// Package cli is stackfit's command line: it parses arguments, loads stack
// files and hands them to the engine, the report writers, the exporter or
// the editor.
package cli

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
	"sync"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/report"
	"stackfit/engine/stackfile"
	"stackfit/engine/textsafe"
	"stackfit/ui/store"
)

// Exit statuses.
const (
	ExitOK       = 0 // clean
	ExitProblems = 1 // the stack has errors, does not fit, or (check --strict) has warnings
	ExitUsage    = 2 // bad usage or unreadable input
)

// IO bundles the streams a command uses.
type IO struct {
	In       io.Reader
	Out, Err io.Writer
	Terminal bool   // In and Out are a terminal
	Term     string // $TERM; "dumb" (a terminal without cursor control) counts as no terminal for the editor
}

// editorCan reports whether the editor can run on std: In and Out are a
// terminal, and one that can move the cursor.
func (std IO) editorCan() bool { return std.Terminal && !dumbTerminal(std.Term) }

// plainInstead tells, on a terminal TERM=dumb keeps the editor off, that
// plain output (what) comes instead of the editor.
func plainInstead(std IO, what string) {
	if std.Terminal && dumbTerminal(std.Term) {
		fmt.Fprintf(std.Err, "stackfit: TERM=dumb: this terminal cannot move the cursor, so %s comes instead of the editor; for the editor use a terminal that supports cursor control (e.g. TERM=xterm-256color)\n", what)
	}
}

// Run executes stackfit with args (without the program name) and returns
// the exit status.
func Run(args []string, std IO) int {
	if len(args) == 0 {
		if !std.editorCan() {
			plainInstead(std, "the example's report")
			return showExample(std)
		}
		return runEditor("", examples.FruitGrader(), std)
	}
	switch args[0] {
	case "example":
		return runExample(args[1:], std)
	case "report":
		return runReport(args[1:], std)
	case "check":
		return runCheck(args[1:], std)
	case "export":
		return runExport(args[1:], std)
	case "calibrate":
		return runCalibrate(args[1:], std)
	case "import":
		return runImport(args[1:], std)
	case "scale":
		return runScale(args[1:], std)
	case "sweep":
		return runSweep(args[1:], std)
	case "help", "-h", "--help", "-help":
		if len(args) > 1 && args[1] != "help" && !strings.HasPrefix(args[1], "-") {
			u, ok := commandUsage()[args[1]]
			if !ok {
				fmt.Fprintf(std.Err, "stackfit help: no command is called %q%s; the commands: %s\n", args[1], didYouMean(args[1]), strings.Join(commands, ", "))
				return ExitUsage
			}
			fmt.Fprint(std.Out, u)
			return ExitOK
		}
		fmt.Fprint(std.Out, usage())
		return ExitOK
	}
	if len(args) == 1 && !strings.HasPrefix(args[0], "-") && (strings.ContainsAny(args[0], "./") || fileExists(args[0])) {
		if !std.Terminal {
			fmt.Fprintf(std.Err, "stackfit: the editor needs a terminal; for a printout use: stackfit report %s\n", textsafe.Line(args[0]))
			return ExitUsage
		}
		if dumbTerminal(std.Term) {
			fmt.Fprintf(std.Err, "stackfit: %s\n", dumbRefusal(args[0]))
			return ExitUsage
		}
		return runEditor(args[0], nil, std)
	}
	fmt.Fprintf(std.Err, "stackfit: unknown command %q%s (commands: %s; a stack file name needs its extension, e.g. net.yaml)\n\n%s", args[0], didYouMean(args[0]), strings.Join(commands, ", "), usage())
	return ExitUsage
}

// commands are stackfit's commands, for messages and suggestions.
var commands = []string{"report", "check", "export", "calibrate", "import", "scale", "sweep", "example", "help"}

// didYouMean suggests the command that name is a likely typo of (within
// one edit per four letters, at least one; insertions, deletions,
// substitutions and swaps of neighbours count one each), or the one
// command it begins, as "; did you mean %q?" — or "".
func didYouMean(name string) string {
	best := engine.Suggest(name, commands)
	if lower := strings.ToLower(name); best == "" && len(lower) >= 2 {
		var prefixed []string
		for _, c := range commands {
			if strings.HasPrefix(c, lower) {
				prefixed = append(prefixed, c)
			}
		}
		if len(prefixed) == 1 {
			best = prefixed[0]
		}
	}
	if best == "" {
		return ""
	}
	return fmt.Sprintf("; did you mean %q?", best)
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

// usage is the top-level help. It and commandUsage are built on first use,
// not at start-up: the training flags' lines come from the engine's
// settings, and a report has no need of them.
var usage = sync.OnceValue(func() string {
	return `stackfit — size a convolutional network before you write it

usage:
  stackfit                        edit the built-in example (fruit grader);
                                  without a terminal, print its report
  stackfit FILE                   edit FILE (a new file starts empty)
  stackfit report FILE [flags]    print the numbers: text, markdown, csv or json
  stackfit check FILE [flags]     for CI: errors, warnings and the memory
                                  verdict
  stackfit export FILE [flags]    write the stack as a PyTorch module
  stackfit calibrate FILE [M]     set FILE's workspace and overhead from a
                                  measurement M (python NET.py --measure)
  stackfit import MODEL.onnx      read an ONNX model into a stack file
  stackfit scale FILE [flags]     write a wider, deeper or larger-input copy
                                  (compound scaling too), or find the largest
                                  that fits the budget
  stackfit sweep FILE [flags]     tabulate a grid of widths, depths,
                                  resolutions, batches and precisions: MACs,
                                  memory estimate, largest batch, and the
                                  compute-memory frontier
  stackfit example [NAME] [-o F]  list the built-in examples, edit one, or
                                  write it to F
  stackfit help COMMAND           the flags of one command (or COMMAND --help)

FILE may be '-' to read the stack from standard input (report, check, export).

exit status: 0 clean · 1 the stack has errors or does not fit the budget
(check --strict: or has warnings) · 2 bad usage or unreadable input
` + trainingUsage()
})

// commandUsage returns each command's help, by command name.
var commandUsage = sync.OnceValue(func() map[string]string {
	return map[string]string{
		"example": `usage: stackfit example [NAME] [-o FILE]

Without NAME, lists the built-in example stacks. With NAME, opens it in the
editor (unsaved until you pick a file), or prints its stack file when not
run in a terminal.

  -o FILE        write the example's stack file to FILE (refused if FILE exists)

examples:
  stackfit example
  stackfit example fruit-grader-board -o board.yaml
`,
		"report": `usage: stackfit report FILE [flags]

Prints every layer's output size, parameters, MACs and receptive field,
the totals and the training-memory estimate.

  --format F     text (default, for a terminal), markdown (for design
                 documents), csv (for spreadsheets) or json (for scripts)
                 e.g. --format markdown
  -o FILE        write to FILE instead of standard output   e.g. -o net.md

examples:
  stackfit report net.yaml
  stackfit report net.yaml --format json -o net.json
  cat net.yaml | stackfit report - --batch 512 --budget 80GiB
` + trainingUsage(),
		"check": `usage: stackfit check FILE [flags]

For the CI of a model repository: prints each error, each warning and the
memory verdict, one per line with the layer's path, and exits 0 when clean,
1 when the stack has errors or does not fit the budget, 2 on bad usage or
an unreadable file.

  --strict       warnings fail the check too      e.g. --strict

examples:
  stackfit check net.yaml --budget 24GiB
  stackfit check net.yaml --budget auto --strict
` + trainingUsage(),
		"export": `usage: stackfit export FILE [flags]

Writes a self-contained Python module with one nn.Module class for the
stack (blocks, residual shortcuts, concatenations and crops included) and a
comment header with stackfit's totals.

  --to T         the framework: pytorch (the only one so far)
                 e.g. --to pytorch
  -o FILE        write to FILE instead of standard output   e.g. -o net.py

The module also measures: python net.py --measure --batch 64 --precision
bf16-mixed --optimizer adamw trains a few steps on synthetic data (CUDA when
present, the CPU otherwise) and prints stackfit's estimate per category
beside the measured peak, and a line stackfit calibrate reads.

examples:
  stackfit export net.yaml --to pytorch -o net.py
` + trainingUsage(),
		"scale": scaleUsage + trainingUsage(),
		"sweep": sweepUsage + trainingUsage(),
		"import": `usage: stackfit import MODEL.onnx [-o NET.yaml] [--partial]

Reads an ONNX model (torch.onnx.export writes them) into a stack file
written as a person would write it: residual additions become residual
blocks, concatenations forks, pooled products gates, repeated stages
blocks with a repeat count, repeated conv-norm-activation runs and
repeated modules units, named after the graph's modules. What the stack
file cannot say (several inputs or outputs, crossing paths) stops the
import at that node, named with its operator and position. Every import
is checked: it must hold exactly the graph's parameters and buffers.
Models up to 512 MiB are read.

  -o FILE        write the stack file to FILE (refused if FILE exists)
  --partial      write the layers before a node that stops the import

Export with the batch norms kept:
  torch.onnx.export(model, x, "net.onnx",
                    training=torch.onnx.TrainingMode.PRESERVE,
                    do_constant_folding=False)

examples:
  stackfit import net.onnx -o net.yaml
`,
		"calibrate": `usage: stackfit calibrate FILE [MEASUREMENT]

Sets the training section's workspace and overhead in FILE to what a
measurement on the training box found: MEASUREMENT is the output of the
exported module's measuring entry point (a file, or standard input when
left out or -). The file is written atomically and keeps its comments.

  --cpu          take a measurement made on the CPU (refused otherwise:
                 it says nothing of a GPU's workspace and CUDA overhead)

examples:
  stackfit export net.yaml -o net.py
  python net.py --measure --batch 64 --precision bf16-mixed \
    | stackfit calibrate net.yaml
`,
	}
})

// runExample lists, opens or writes a built-in example.
func runExample(args []string, std IO) int {
	fs := flag.NewFlagSet("example", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	out := fs.String("o", "", "")
	pos, err := parseInterleaved(fs, args)
	if errors.Is(err, flag.ErrHelp) {
		fmt.Fprint(std.Out, commandUsage()["example"])
		return ExitOK
	}
	if err != nil || len(pos) > 1 {
		if err == nil {
			err = fmt.Errorf("give at most one example name (got %d)", len(pos))
		}
		fmt.Fprintf(std.Err, "stackfit example: %s\n(stackfit example --help lists the flags)\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	all := examples.All()
	if len(pos) == 0 {
		for _, e := range all {
			fmt.Fprintf(std.Out, "  %-20s %s\n", e.Name, e.About)
		}
		fmt.Fprint(std.Out, "\nopen one with: stackfit example NAME   (or write it: stackfit example NAME -o FILE)\n")
		return ExitOK
	}
	e, ok := examples.Find(pos[0])
	if !ok {
		names := make([]string, len(all))
		for i := range all {
			names[i] = all[i].Name
		}
		fmt.Fprintf(std.Err, "stackfit example: no example is called %q; the examples: %s\n", pos[0], strings.Join(names, ", "))
		return ExitUsage
	}
	switch {
	case *out != "":
		if _, err := os.Lstat(*out); err == nil {
			fmt.Fprintf(std.Err, "stackfit example: %q already exists; stackfit does not overwrite a file it has not read — choose another name\n", *out)
			return ExitUsage
		}
		if err := store.WriteFileAtomic(*out, e.Data(), 0o644); err != nil {
			fmt.Fprintf(std.Err, "stackfit example: %s\n", textsafe.Text(err.Error()))
			return ExitUsage
		}
		fmt.Fprintf(std.Out, "wrote %q; edit it with: stackfit %q\n", *out, *out)
		return ExitOK
	case std.editorCan():
		return runEditor("", e.Data(), std)
	}
	plainInstead(std, "the example's stack file")
	_, err = std.Out.Write(e.Data())
	if err != nil {
		return ExitUsage
	}
	return ExitOK
}

func showExample(std IO) int {
	s, err := stackfile.Load(examples.FruitGrader())
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit: built-in example: %v\n", err)
		return ExitUsage
	}
	an := engine.Analyze(s, s.Training, engine.DefaultAssumptions())
	if err := report.WriteText(std.Out, an); err != nil {
		fmt.Fprintf(std.Err, "stackfit: %v\n", err)
		return ExitUsage
	}
	return ExitOK
}

// command is what report, check and export share: a flag set with the
// training flags, one stack file, and its analysis.
type command struct {
	name string
	fs   *flag.FlagSet
	tf   trainingFlags
	std  IO
	file string
}

func newCommand(name string, std IO) *command {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	return &command{name: name, fs: fs, tf: addTrainingFlags(fs), std: std}
}

// parse reads the arguments; it returns an exit status when the command
// must stop (help asked, or bad usage).
func (c *command) parse(args []string) (int, bool) {
	pos, err := parseInterleaved(c.fs, args)
	if errors.Is(err, flag.ErrHelp) {
		fmt.Fprint(c.std.Out, commandUsage()[c.name])
		return ExitOK, true
	}
	if err != nil {
		fmt.Fprintf(c.std.Err, "stackfit %s: %s\n(stackfit %s --help lists the flags)\n", c.name, textsafe.Text(err.Error()), c.name)
		return ExitUsage, true
	}
	if len(pos) != 1 {
		fmt.Fprintf(c.std.Err, "stackfit %s: give exactly one stack file (got %d); e.g. stackfit %s net.yaml\n", c.name, len(pos), c.name)
		return ExitUsage, true
	}
	c.file = pos[0]
	if o := c.fs.Lookup("o"); o != nil && o.Value.String() != "" && c.file != "-" && store.SameFile(c.file, o.Value.String()) {
		fmt.Fprintf(c.std.Err, "stackfit %s: -o %q is the input file %q; stackfit does not write over its input — give -o another name\n", c.name, o.Value.String(), c.file)
		return ExitUsage, true
	}
	return 0, false
}

// fail reports err, which may quote file names and file contents,
// terminal-safe (one problem per line).
func (c *command) fail(err error) int {
	fmt.Fprintf(c.std.Err, "stackfit %s: %s\n", c.name, textsafe.Text(err.Error()))
	return ExitUsage
}

// analyze loads the file and evaluates it under the effective settings.
func (c *command) analyze() (*engine.Analysis, error) {
	s, err := load(c.file, c.std.In)
	if err != nil {
		return nil, err
	}
	t, err := c.tf.apply(s.Training)
	if err != nil {
		return nil, err
	}
	return engine.Analyze(s, t, engine.DefaultAssumptions()), nil
}

// output streams write to -o FILE (atomically) or to standard output,
// through a buffer either way: no report is held in memory whole.
func (c *command) output(path string, write func(io.Writer) error) error {
	if path != "" {
		return store.WriteAtomic(path, 0o644, write)
	}
	bw := bufio.NewWriterSize(c.std.Out, 64<<10)
	if err := write(bw); err != nil {
		bw.Flush()
		return err
	}
	return bw.Flush()
}

func runReport(args []string, std IO) int {
	c := newCommand("report", std)
	format := c.fs.String("format", "text", "")
	out := c.fs.String("o", "", "")
	if code, stop := c.parse(args); stop {
		return code
	}
	writers := map[string]func(io.Writer, *engine.Analysis) error{
		"text": report.WriteText, "json": report.WriteJSON, "markdown": report.WriteMarkdown, "csv": report.WriteCSV,
	}
	write, ok := writers[*format]
	if !ok {
		fmt.Fprintf(std.Err, "stackfit report: --format %q is not known; use text, markdown, csv or json\n", *format)
		return ExitUsage
	}
	an, err := c.analyze()
	if err != nil {
		return c.fail(err)
	}
	if err := c.output(*out, func(w io.Writer) error { return write(w, an) }); err != nil {
		return c.fail(err)
	}
	if an.Result.Errors > 0 {
		return ExitProblems
	}
	return ExitOK
}

// load reads a stack from a file, or from in when path is "-".
func load(path string, in io.Reader) (*engine.Stack, error) {
	if path != "-" {
		return store.LoadFile(path)
	}
	data, err := io.ReadAll(io.LimitReader(in, stackfile.MaxFileBytes+1))
	if err != nil {
		return nil, fmt.Errorf("read standard input: %w", err)
	}
	s, err := stackfile.Load(data)
	var list stackfile.ErrorList
	if errors.As(err, &list) {
		for _, e := range list {
			e.File = "<stdin>"
		}
	}
	return s, err
}

// parseInterleaved parses flags that may come before or after positional
// arguments ("report net.yaml --format json").
func parseInterleaved(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		args = fs.Args()
		if len(args) == 0 {
			return pos, nil
		}
		if args[0] == "--" {
			return append(pos, args[1:]...), nil
		}
		pos = append(pos, args[0])
		args = args[1:]
	}
}

// Main runs stackfit on the process's arguments and streams.
func Main() int {
	return Run(os.Args[1:], IO{In: os.Stdin, Out: os.Stdout, Err: os.Stderr, Terminal: interactive(), Term: os.Getenv("TERM")})
}
