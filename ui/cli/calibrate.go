package cli

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"

	"stackfit/engine"
	"stackfit/engine/textsafe"
	"stackfit/ui/store"
)

// calibration is what a module's measuring entry point found: the line
// "stackfit-calibration: device=… workspace=N overhead=M" it prints last.
type calibration struct {
	device              string
	workspace, overhead int64
}

// calibrationPrefix starts the line the measuring entry point prints.
const calibrationPrefix = "stackfit-calibration:"

// maxMeasurement bounds what is read of a measurement's output.
const maxMeasurement = 1 << 20

// maxCalibration bounds a calibrated size (1 PiB: no GPU holds more).
const maxCalibration = 1 << 50

// readCalibration finds the last calibration line in r.
func readCalibration(r io.Reader) (calibration, error) {
	var c calibration
	found := false
	sc := bufio.NewScanner(io.LimitReader(r, maxMeasurement))
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		rest, ok := strings.CutPrefix(line, calibrationPrefix)
		if !ok {
			continue
		}
		var n calibration
		seen := 0
		for _, f := range strings.Fields(rest) {
			k, v, _ := strings.Cut(f, "=")
			switch k {
			case "device":
				n.device = v
				seen++
			case "workspace", "overhead":
				x, err := strconv.ParseInt(v, 10, 64)
				if err != nil || x < 0 || x > maxCalibration {
					return c, fmt.Errorf("the calibration line's %s is %q; expected a byte count", k, v)
				}
				if k == "workspace" {
					n.workspace = x
				} else {
					n.overhead = x
				}
				seen++
			}
		}
		if seen != 3 {
			return c, fmt.Errorf("the calibration line %q lacks device, workspace or overhead", textsafe.Line(line))
		}
		c, found = n, true
	}
	if err := sc.Err(); err != nil {
		return c, fmt.Errorf("read the measurement: %w", err)
	}
	if !found {
		return c, fmt.Errorf("no %q line: give the output of python NET.py --measure (stackfit export writes NET.py)", calibrationPrefix)
	}
	return c, nil
}

// runCalibrate sets the training section's workspace and overhead from a
// measurement the exported module made on the training box, each rounded
// up to three significant digits (engine.CeilBytes).
func runCalibrate(args []string, std IO) int {
	fs := flag.NewFlagSet("calibrate", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	cpu := fs.Bool("cpu", false, "")
	pos, err := parseInterleaved(fs, args)
	if errors.Is(err, flag.ErrHelp) {
		fmt.Fprint(std.Out, commandUsage()["calibrate"])
		return ExitOK
	}
	if err != nil || len(pos) < 1 || len(pos) > 2 {
		if err == nil {
			err = errors.New("give the stack file and the measurement (a file, or - or nothing for standard input)")
		}
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n%s", textsafe.Text(err.Error()), commandUsage()["calibrate"])
		return ExitUsage
	}
	file := pos[0]
	in := std.In
	if len(pos) == 2 && pos[1] != "-" {
		f, err := store.OpenRegular(pos[1])
		if err != nil {
			fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
			return ExitUsage
		}
		defer f.Close()
		in = f
	}
	c, err := readCalibration(in)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	if c.device == "cpu" && !*cpu {
		fmt.Fprintf(std.Err, "stackfit calibrate: the measurement ran on the CPU, whose figures say nothing of a GPU's workspace and CUDA overhead; measure on the training box, or pass --cpu to take it anyway\n")
		return ExitUsage
	}
	disk := store.Disk{}
	s, data, err := disk.Load(file)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	// Rounded up to the precision a person reads (25.9MiB, not
	// 27097776B), so the file stays readable and the estimate errs high.
	c.workspace, c.overhead = engine.CeilBytes(c.workspace), engine.CeilBytes(c.overhead)
	was := s.Training
	s.Training.Workspace, s.Training.Overhead = c.workspace, c.overhead
	if _, note, err := disk.Save(file, s, data, store.SaveMode{}); err != nil {
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	} else if note != "" {
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Line(note))
	}
	show := func(v, d int64) string {
		if v == 0 {
			return engine.FormatBytes(d) + ", the default"
		}
		return engine.FormatBytes(v)
	}
	fmt.Fprintf(std.Out, "%s: workspace %s (was %s), overhead %s (was %s), measured on %s\n", textsafe.Line(file),
		engine.FormatBytes(c.workspace), show(was.Workspace, engine.DefaultWorkspace),
		engine.FormatBytes(c.overhead), show(was.Overhead, engine.DefaultOverhead), textsafe.Line(strings.ReplaceAll(c.device, "_", " ")))
	return ExitOK
}
