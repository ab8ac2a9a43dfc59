package cli

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"slices"
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
	memory              bool // the memory line was found
	// From the "stackfit-probe:" lines: the device they ran on, the
	// precision and the efficiency per class (engine.Achieved).
	probeDevice string
	precision   engine.Precision
	eff         engine.Efficiency
	capped      []string // classes whose efficiency came out above 100%
	// Per class, over its probes weighed by their counts: the seconds
	// the roofline gives the work at the device's full peak, and the
	// seconds measured; eff is their ratio.
	ideal, spent engine.Efficiency
}

// probePrefix starts a micro-benchmark's line.
const probePrefix = "stackfit-probe:"

// readProbe reads one micro-benchmark line into c: device, class,
// precision, flops, bytes and seconds.
func readProbe(c *calibration, line, rest string) error {
	kv := map[string]string{}
	for _, f := range strings.Fields(rest) {
		k, v, _ := strings.Cut(f, "=")
		kv[k] = v
	}
	class, ok := engine.ClassByKey(kv["class"])
	if !ok {
		return fmt.Errorf("the probe line %q names no class (%s)", textsafe.Line(line), classList())
	}
	ps, _ := engine.SettingFor("precision")
	i, err := engine.ParseChoice("precision", kv["precision"], ps.Options)
	if err != nil {
		return fmt.Errorf("the probe line %q: %v", textsafe.Line(line), err)
	}
	var num [3]float64
	for j, k := range []string{"flops", "bytes", "seconds"} {
		x, err := strconv.ParseFloat(kv[k], 64)
		if err != nil || !(x >= 0) || math.IsInf(x, 0) {
			return fmt.Errorf("the probe line's %s is %q; expected a number of 0 or more", k, kv[k])
		}
		num[j] = x
	}
	dev := kv["device"]
	if dev == "" || c.probeDevice != "" && dev != c.probeDevice {
		return fmt.Errorf("the probe lines name devices %q and %q; measure one device at a time", textsafe.Line(c.probeDevice), textsafe.Line(dev))
	}
	c.probeDevice = dev
	c.precision = engine.Precision(i)
	d, ok := probeDeviceOf(dev)
	if !ok {
		return fmt.Errorf("the probes ran on %s, which stackfit's device table lacks: an efficiency is a share of the device's peaks", textsafe.Line(strings.ReplaceAll(dev, "_", " ")))
	}
	count := 1.0
	if v, ok := kv["count"]; ok {
		n, err := strconv.ParseInt(v, 10, 32)
		if err != nil || n < 1 {
			return fmt.Errorf("the probe line's count is %q; expected a whole number of 1 or more", textsafe.Line(v))
		}
		count = float64(n)
	}
	e := engine.Achieved(d, class, c.precision, num[0], num[1], num[2])
	if e <= 0 {
		return fmt.Errorf("the probe line %q gives no efficiency (no work or no time)", textsafe.Line(line))
	}
	c.ideal[class] += count * e * num[2]
	c.spent[class] += count * num[2]
	e = c.ideal[class] / c.spent[class]
	if e > engine.MaxEfficiency {
		e = engine.MaxEfficiency
		if !slices.Contains(c.capped, engine.ClassKey(class)) {
			c.capped = append(c.capped, engine.ClassKey(class))
		}
	} else {
		c.capped = slices.DeleteFunc(c.capped, func(k string) bool { return k == engine.ClassKey(class) })
	}
	c.eff[class] = e
	return nil
}

// classList names the classes of operation a probe line may give.
func classList() string {
	var keys []string
	for _, c := range engine.OpClasses() {
		keys = append(keys, engine.ClassKey(c))
	}
	return strings.Join(keys, ", ")
}

// gpuKey returns the device key the training settings name.
func gpuKey(t engine.Training) string {
	if d, ok := t.Device(); ok {
		return d.Key
	}
	return "none"
}

// probeDeviceOf returns the device of a probe line: "cpu", or a GPU name
// as torch reports it (spaces written as underscores).
func probeDeviceOf(name string) (engine.Device, bool) {
	if name == engine.CPUDevice.Key {
		return engine.CPUDevice, true
	}
	return engine.DeviceFromName(strings.ReplaceAll(name, "_", " "))
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
		if rest, ok := strings.CutPrefix(line, probePrefix); ok {
			if err := readProbe(&c, line, rest); err != nil {
				return c, err
			}
			found = true
			continue
		}
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
		c.device, c.workspace, c.overhead, c.memory, found = n.device, n.workspace, n.overhead, true, true
	}
	if err := sc.Err(); err != nil {
		return c, fmt.Errorf("read the measurement: %w", err)
	}
	if !found {
		return c, fmt.Errorf("no %q or %q line: give the output of python NET.py --measure (stackfit export writes NET.py)", calibrationPrefix, probePrefix)
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
	if (c.memory && c.device == "cpu" || c.probeDevice == engine.CPUDevice.Key) && !*cpu {
		fmt.Fprintf(std.Err, "stackfit calibrate: the measurement ran on the CPU, whose figures say nothing of a GPU's workspace, CUDA overhead or speed; measure on the training box, or pass --cpu to take it anyway (efficiencies measured on the CPU set the file's gpu to cpu)\n")
		return ExitUsage
	}
	disk := store.Disk{}
	s, data, err := disk.Load(file)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	was := s.Training
	if c.memory {
		// Rounded up to the precision a person reads (25.9MiB, not
		// 27097776B), so the file stays readable and the estimate errs high.
		c.workspace, c.overhead = engine.CeilBytes(c.workspace), engine.CeilBytes(c.overhead)
		s.Training.Workspace, s.Training.Overhead = c.workspace, c.overhead
	}
	if c.probeDevice != "" {
		// The efficiencies are shares of this device's peaks: the file's
		// device becomes the measured one, and classes not measured go
		// back to the defaults (they were shares of another calibration).
		d, _ := probeDeviceOf(c.probeDevice)
		gs, _ := engine.SettingFor("gpu")
		if err := gs.Parse(&s.Training, d.Key); err != nil {
			fmt.Fprintf(std.Err, "stackfit calibrate: %s\n", textsafe.Text(err.Error()))
			return ExitUsage
		}
		s.Training.Efficiency = c.eff
	}
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
	if c.memory {
		fmt.Fprintf(std.Out, "%s: workspace %s (was %s), overhead %s (was %s), measured on %s\n", textsafe.Line(file),
			engine.FormatBytes(c.workspace), show(was.Workspace, engine.DefaultWorkspace),
			engine.FormatBytes(c.overhead), show(was.Overhead, engine.DefaultOverhead), textsafe.Line(strings.ReplaceAll(c.device, "_", " ")))
	}
	if c.probeDevice != "" {
		fmt.Fprintf(std.Out, "%s: efficiency %s, gpu %s, measured at %s on %s (shares of the device's peaks; an estimate's inputs, not a promise)\n",
			textsafe.Line(file), engine.FormatEfficiency(c.eff), gpuKey(s.Training), c.precision, textsafe.Line(strings.ReplaceAll(c.probeDevice, "_", " ")))
		if len(c.capped) > 0 {
			fmt.Fprintf(std.Err, "stackfit calibrate: %s came out above the device's peak and was capped at 100%%: the table's peaks may be wrong for this device\n", strings.Join(c.capped, ", "))
		}
	}
	return ExitOK
}
