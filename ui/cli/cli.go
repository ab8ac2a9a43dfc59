// Package cli is stackfit's command line: it parses arguments, loads stack
// files and hands them to the engine and the report writers.
package cli

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/report"
	"stackfit/engine/stackfile"
)

// Exit statuses.
const (
	ExitOK       = 0 // clean
	ExitProblems = 1 // the stack has errors
	ExitUsage    = 2 // bad usage or unreadable input
)

// IO bundles the streams a command uses.
type IO struct {
	In       io.Reader
	Out, Err io.Writer
	Terminal bool // In and Out are a terminal: the editor can run
}

// Run executes stackfit with args (without the program name) and returns
// the exit status.
func Run(args []string, std IO) int {
	if len(args) == 0 {
		if !std.Terminal {
			return showExample(std)
		}
		return runEditor("", std)
	}
	switch args[0] {
	case "report":
		return runReport(args[1:], std)
	case "help", "-h", "--help", "-help":
		fmt.Fprint(std.Out, usage)
		return ExitOK
	}
	if len(args) == 1 && !strings.HasPrefix(args[0], "-") && (strings.ContainsAny(args[0], "./") || fileExists(args[0])) {
		if !std.Terminal {
			fmt.Fprintf(std.Err, "stackfit: the editor needs a terminal; for a printout use: stackfit report %s\n", args[0])
			return ExitUsage
		}
		return runEditor(args[0], std)
	}
	fmt.Fprintf(std.Err, "stackfit: unknown command %q (commands: report, help; a stack file name needs its extension, e.g. net.yaml)\n\n%s", args[0], usage)
	return ExitUsage
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

const usage = `stackfit — size a convolutional network before you write it

usage:
  stackfit                          edit the built-in example (fruit grader);
                                    without a terminal, print its report
  stackfit FILE                     edit FILE (a new file starts empty)
  stackfit report FILE [flags]      report a stack file ('-' reads standard input)

report flags:
  --format text|json   output format (default text)
  -o FILE              write the report to FILE instead of standard output

training flags (override the stack file's training section):
  --batch N            samples per optimizer step over all GPUs
  --precision P        fp32, fp16-mixed, bf16-mixed or bf16
  --optimizer O        sgd, momentum, adam, adamw, adagrad or rmsprop
  --budget SIZE        GPU memory per device: 24GiB, 24GB, 24000MiB
  --gpus N             data-parallel GPUs
  --shard S            none, optimizer, gradients or parameters (ZeRO stages)
  --accumulate N       gradient-accumulation steps per optimizer step
  --checkpoint K       keep every K-th layer's output, recompute the rest
  --workspace SIZE     convolution workspace (default 256MiB)
  --overhead SIZE      CUDA context and library overhead (default 512MiB)
  --headroom SHARE     share of the budget kept free (default 10%)

exit status: 0 clean, 1 the stack has errors, 2 bad usage or unreadable file

example:
  stackfit report net.yaml --format json -o net.json
  stackfit report net.yaml --batch 512 --precision bf16-mixed --budget 80GiB
`

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

func runReport(args []string, std IO) int {
	fs := flag.NewFlagSet("report", flag.ContinueOnError)
	fs.SetOutput(std.Err)
	format := fs.String("format", "text", "output format: text or json")
	out := fs.String("o", "", "write the report to this file")
	tf := addTrainingFlags(fs)
	fs.Usage = func() { fmt.Fprint(std.Err, usage) }
	pos, err := parseInterleaved(fs, args)
	if err != nil {
		return ExitUsage
	}
	if len(pos) != 1 {
		fmt.Fprintf(std.Err, "stackfit report: give exactly one stack file (got %d); e.g. stackfit report net.yaml\n", len(pos))
		return ExitUsage
	}
	var write func(io.Writer, *engine.Analysis) error
	switch *format {
	case "text":
		write = report.WriteText
	case "json":
		write = report.WriteJSON
	default:
		fmt.Fprintf(std.Err, "stackfit report: --format %q is not known; use text or json\n", *format)
		return ExitUsage
	}
	s, err := load(pos[0], std.In)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit report: %v\n", err)
		return ExitUsage
	}
	t, err := tf.apply(s.Training)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit report: %v\n", err)
		return ExitUsage
	}
	an := engine.Analyze(s, t, engine.DefaultAssumptions())
	r := an.Result
	if *out != "" {
		var buf strings.Builder
		if err := write(&buf, an); err != nil {
			fmt.Fprintf(std.Err, "stackfit report: %v\n", err)
			return ExitUsage
		}
		if err := stackfile.WriteFileAtomic(*out, []byte(buf.String()), 0o644); err != nil {
			fmt.Fprintf(std.Err, "stackfit report: %v\n", err)
			return ExitUsage
		}
	} else if err := write(std.Out, an); err != nil {
		fmt.Fprintf(std.Err, "stackfit report: %v\n", err)
		return ExitUsage
	}
	if r.Errors > 0 {
		return ExitProblems
	}
	return ExitOK
}

// load reads a stack from a file, or from in when path is "-".
func load(path string, in io.Reader) (*engine.Stack, error) {
	if path != "-" {
		return stackfile.LoadFile(path)
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
	return Run(os.Args[1:], IO{In: os.Stdin, Out: os.Stdout, Err: os.Stderr, Terminal: interactive()})
}
