package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// millionRows is 174 bytes that expand to 1,048,576 rows: a block of 1024
// repeats of a block of 512 repeats of two layers.
const millionRows = `stackfit: 1
name: million
input: [8, 8, 8]
layers:
  - block: 1024
    layers:
      - block: 512
        layers:
          - act: relu
          - conv: 8
            kernel: 1
`

// TestMillionRowPeakRSS runs every command on a small file that expands
// to 1,048,576 rows (the row limit) and holds each to the README's bound
// of 300 MB peak resident memory, read from the kernel's resource usage
// of the child process (getrusage's ru_maxrss, the figure /usr/bin/time -v
// prints; it also counts the test process's own pages at the moment of
// exec, so it errs high). It takes about half a minute on two cores, so it runs when
// STACKFIT_RSS=1 is set, as .ci/run does.
func TestMillionRowPeakRSS(t *testing.T) {
	if os.Getenv("STACKFIT_RSS") != "1" {
		t.Skip("set STACKFIT_RSS=1 to run the million-row memory check (.ci/run does)")
	}
	dir := t.TempDir()
	bin := build(t, dir)
	file := filepath.Join(dir, "million.yaml")
	if err := os.WriteFile(file, []byte(millionRows), 0o644); err != nil {
		t.Fatal(err)
	}
	const limit = 300_000_000 // bytes
	for _, args := range [][]string{
		{"check", file},
		{"report", file},
		{"report", "--format", "markdown", file},
		{"report", "--format", "csv", file},
		{"report", "--format", "json", file},
		{"report", "--format", "json", "-o", filepath.Join(dir, "million.json"), file},
		{"export", file},
		{"export", "-o", filepath.Join(dir, "million.py"), file},
	} {
		cmd := exec.Command(bin, args...)
		cmd.Env = append(os.Environ(), "GOMEMLIMIT=") // the binary's own soft limit, as a user gets it
		out, err := os.Create(filepath.Join(dir, "stdout"))
		if err != nil {
			t.Fatal(err)
		}
		cmd.Stdout = out
		var stderr strings.Builder
		cmd.Stderr = &stderr
		err = cmd.Run()
		out.Close()
		if err != nil && cmd.ProcessState.ExitCode() != 0 {
			t.Errorf("%v: %v\n%s", args, err, stderr.String())
			continue
		}
		info, _ := os.Stat(filepath.Join(dir, "stdout"))
		rss := cmd.ProcessState.SysUsage().(*syscall.Rusage).Maxrss * 1024 // kilobytes on Linux
		label := strings.ReplaceAll(strings.Join(args, " "), dir+"/", "")
		t.Logf("%-48s peak RSS %4d MB, %4d MB to stdout", label, rss/1_000_000, info.Size()/1_000_000)
		if rss > limit {
			t.Errorf("%v: peak RSS %d MB, over the %d MB bound", args, rss/1_000_000, limit/1_000_000)
		}
	}
}
