package cli

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/ui/store"
)

// TestCalibrateWritesReadableSizes: calibrate writes the measured
// workspace and overhead in the units a person reads (25.9MiB, not
// 27097776B), rounded up so the estimate errs high, and the file loads
// back (stackfit check passes) with those sizes. Source: the measuring
// entry point's calibration line.
func TestCalibrateWritesReadableSizes(t *testing.T) {
	file := filepath.Join(t.TempDir(), "cap.yaml")
	if err := os.WriteFile(file, []byte(measureStack), 0o644); err != nil {
		t.Fatal(err)
	}
	meas := "stackfit measure: NVIDIA H100, batch 4, fp32, sgd\nstackfit-calibration: device=NVIDIA_H100 workspace=27097776 overhead=536870913\n"
	out, errs, code := run(t, meas, "calibrate", file)
	if code != ExitOK {
		t.Fatalf("calibrate: exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "workspace 25.9 MiB") || !strings.Contains(out, "overhead 513 MiB") {
		t.Errorf("calibrate says %q", out)
	}
	data, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"workspace: 25.9MiB\n", "overhead: 513MiB\n"} {
		if !strings.Contains(string(data), want) {
			t.Errorf("the file lacks %q:\n%s", want, data)
		}
	}
	s, err := store.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if s.Training.Workspace < 27097776 || s.Training.Workspace > 27097776+(1<<20)/10 ||
		s.Training.Overhead < 536870913 || s.Training.Overhead > 536870913+(1<<20) {
		t.Errorf("loaded workspace %d, overhead %d: not the measurement rounded up to what is shown", s.Training.Workspace, s.Training.Overhead)
	}
	if _, errs, code := run(t, "", "check", file); code != ExitOK {
		t.Errorf("check after calibrate: exit %d: %s", code, errs)
	}
}

// TestCalibrateWritesEfficiencies: probe lines give the efficiency per
// class as the roofline's time at the device's peak over the measured
// time, and calibrate writes them with the device into the training
// section, from which the time estimate takes them. Source: the CPU
// device's nominal peaks (1 TFLOP/s, 100 GB/s): 1e9 FLOPs in 0.1 s is
// 1 ms at peak, 1%; 1e9 bytes in 0.2 s is 10 ms at peak, 5%.
func TestCalibrateWritesEfficiencies(t *testing.T) {
	file := filepath.Join(t.TempDir(), "cap.yaml")
	if err := os.WriteFile(file, []byte(measureStack), 0o644); err != nil {
		t.Fatal(err)
	}
	meas := "stackfit-probe: device=cpu class=conv precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.1\n" +
		"stackfit-probe: device=cpu class=memory precision=fp32 batch=4 flops=1e6 bytes=1e9 seconds=0.2\n"
	if _, errs, code := run(t, meas, "calibrate", file); code != ExitUsage || !strings.Contains(errs, "--cpu") {
		t.Errorf("a CPU measurement was taken without --cpu: exit %d, %s", code, errs)
	}
	out, errs, code := run(t, meas, "calibrate", file, "--cpu")
	if code != ExitOK {
		t.Fatalf("calibrate: exit %d: %s", code, errs)
	}
	if !strings.Contains(out, "efficiency conv 1%, memory 5%") || !strings.Contains(out, "gpu cpu") {
		t.Errorf("calibrate says %q", out)
	}
	s, err := store.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	e := s.Training.Efficiencies()
	if d, ok := s.Training.Device(); !ok || d.Key != "cpu" || math.Abs(e[1]-0.01) > 1e-12 || math.Abs(e[4]-0.05) > 1e-12 ||
		e[2] != engine.DefaultEfficiency()[2] {
		t.Errorf("loaded device %v, efficiencies %v", s.Training.GPU, e)
	}
	data, _ := os.ReadFile(file)
	if !strings.Contains(string(data), "efficiency: conv 1%, memory 5%") {
		t.Errorf("the file:\n%s", data)
	}
}

// TestCalibrateWeighsProbes: a class's efficiency is the roofline's time
// at the peaks over the measured time, summed over its probes, each
// weighed by the rows it stands for. On the CPU device (1 TFLOP/s): a
// probe of 1e9 FLOPs in 0.1 s (1%) standing for 3 rows and one of 1e9 in
// 0.01 s (10%) standing for 1 give (3·1e-3 + 1e-3) / (3·0.1 + 0.01) = 4/310.
func TestCalibrateWeighsProbes(t *testing.T) {
	file := filepath.Join(t.TempDir(), "cap.yaml")
	if err := os.WriteFile(file, []byte(measureStack), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name, meas string
		want       float64
		err        string
	}{
		{"weighed", "stackfit-probe: device=cpu class=pointwise precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.1 count=3\n" +
			"stackfit-probe: device=cpu class=pointwise precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.01 count=1\n", 4.0 / 310, ""},
		{"no count is one", "stackfit-probe: device=cpu class=pointwise precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.1\n" +
			"stackfit-probe: device=cpu class=pointwise precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.01\n", 2.0 / 110, ""},
		{"bad count", "stackfit-probe: device=cpu class=pointwise precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.1 count=0\n", 0, "count"},
		{"unknown class", "stackfit-probe: device=cpu class=winograd precision=fp32 batch=4 flops=1e9 bytes=1e6 seconds=0.1\n", 0, "pointwise, norm"},
	} {
		_, errs, code := run(t, tc.meas, "calibrate", file, "--cpu")
		if tc.err != "" {
			if code != ExitUsage || !strings.Contains(errs, tc.err) {
				t.Errorf("%s: exit %d, %q; want an error naming %q", tc.name, code, errs, tc.err)
			}
			continue
		}
		if code != ExitOK {
			t.Fatalf("%s: exit %d: %s", tc.name, code, errs)
		}
		s, err := store.LoadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		// the file keeps three significant digits
		if got := s.Training.Efficiency[engine.ClassPointwise]; math.Abs(got-tc.want) > 0.005*tc.want {
			t.Errorf("%s: pointwise %g, want %g", tc.name, got, tc.want)
		}
	}
}
