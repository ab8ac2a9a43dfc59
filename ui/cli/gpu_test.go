package cli

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// fakeSMI puts an nvidia-smi shell script first on PATH and shortens the
// query's limits for the test.
func fakeSMI(t *testing.T, script string) {
	t.Helper()
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "nvidia-smi"), []byte("#!/bin/sh\n"+script), 0o755); err != nil {
		t.Fatal(err)
	}
	t.Setenv("PATH", dir+string(os.PathListSeparator)+os.Getenv("PATH"))
	deadline, delay := gpuDeadline, gpuWaitDelay
	gpuDeadline, gpuWaitDelay = 500*time.Millisecond, 300*time.Millisecond
	t.Cleanup(func() { gpuDeadline, gpuWaitDelay = deadline, delay })
}

// TestBudgetAutoBounded: an nvidia-smi that hangs, that exits leaving a
// child holding its output open, or that prints without end, is stopped
// within the deadline (plus the wait delay) with an error that says what
// happened and how to give the budget instead.
func TestBudgetAutoBounded(t *testing.T) {
	tests := []struct{ name, script, want string }{
		{"hangs with a child holding the pipe", "sleep 30 &\nsleep 30\n", "nvidia-smi did not finish within 500ms and was stopped"},
		{"exits, a child holds the pipe", "sleep 30 &\necho 81559\n", "nvidia-smi exited but a process it started kept its output open"},
		{"endless output", "yes 81559\n", "nvidia-smi printed more than 65536 bytes"},
		{"fails", "echo 'NVIDIA-SMI has failed because it could not talk to the driver' >&2\nexit 9\n",
			"nvidia-smi failed (exit status 9: NVIDIA-SMI has failed because it could not talk to the driver)"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			fakeSMI(t, tt.script)
			start := time.Now()
			_, errs, code := run(t, "", "check", example, "--budget", "auto")
			took := time.Since(start)
			if code != ExitUsage || !strings.Contains(errs, tt.want) || !strings.Contains(errs, "give the budget as a size instead, e.g. --budget 24GiB") {
				t.Errorf("exit %d, stderr %q; want %q", code, errs, tt.want)
			}
			if limit := gpuDeadline + gpuWaitDelay + time.Second; took > limit {
				t.Errorf("took %v; the limit is %v", took, limit)
			}
		})
	}
}

// TestGPUOutputLimit: output of exactly the limit is read whole; one byte
// more is refused.
func TestGPUOutputLimit(t *testing.T) {
	fakeSMI(t, "printf '%016d' 40960\n")
	limit := gpuOutputLimit
	gpuOutputLimit = 16
	defer func() { gpuOutputLimit = limit }()
	if n, err := gpuMemory(); err != nil || n != 40960<<20 {
		t.Errorf("16 bytes: %d, %v", n, err)
	}
	fakeSMI(t, "printf '%017d' 40960\n")
	if _, err := gpuMemory(); err == nil || !strings.Contains(err.Error(), "nvidia-smi printed more than 16 bytes") {
		t.Errorf("17 bytes: %v", err)
	}
}

// TestBudgetAutoDevice: --budget auto also takes the device from the name
// nvidia-smi reports (an H100 SXM reports "NVIDIA H100 80GB HBM3", from
// memory), so the report gains its time estimate; a name the table lacks
// leaves the device unset.
func TestBudgetAutoDevice(t *testing.T) {
	fakeSMI(t, "case \"$1\" in *name*) echo 'NVIDIA H100 80GB HBM3';; *) echo 81559;; esac\n")
	out, errs, code := run(t, "", "report", example, "--budget", "auto")
	if code != ExitOK || !strings.Contains(out, "training time per step — ESTIMATE · h100-sxm") || !strings.Contains(out, "budget 79.6 GiB") {
		t.Errorf("exit %d, stderr %q, output:\n%s", code, errs, out)
	}
	fakeSMI(t, "case \"$1\" in *name*) echo 'NVIDIA GeForce GTX 1080';; *) echo 8192;; esac\n")
	out, _, _ = run(t, "", "report", example, "--budget", "auto")
	if strings.Contains(out, "training time per step") || !strings.Contains(out, "give a GPU for an estimate") {
		t.Errorf("unknown GPU: output:\n%s", out)
	}
}
