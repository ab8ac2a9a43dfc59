package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

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
