package cli

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"os/exec"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"time"

	"stackfit/engine"
)

// errNoGPU says why --budget auto found no GPU memory.
var errNoGPU = errors.New("no GPU memory found")

// Limits on the nvidia-smi query: it must answer within gpuDeadline (the
// process and everything it starts are killed then), and what it prints is
// read up to gpuOutputLimit (a GPU list is a few lines). gpuWaitDelay is how
// long the output is waited for once nvidia-smi has exited or been killed,
// in case something it started still holds it open. Variables for tests.
var (
	gpuDeadline    = 10 * time.Second
	gpuWaitDelay   = time.Second
	gpuOutputLimit = 64 << 10
)

const sizeHint = "give the budget as a size instead, e.g. --budget 24GiB"

// gpuMemory asks nvidia-smi for the total memory of the local GPUs and
// returns the smallest (data-parallel training is limited by it), in bytes.
func gpuMemory() (int64, error) {
	bin, err := exec.LookPath("nvidia-smi")
	if err != nil {
		return 0, fmt.Errorf("%w: nvidia-smi is not on PATH; %s", errNoGPU, sizeHint)
	}
	out, err := runBounded(bin, "--query-gpu=memory.total", "--format=csv,noheader,nounits")
	if err != nil {
		return 0, fmt.Errorf("%w: %v; %s", errNoGPU, err, sizeHint)
	}
	var least int64
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		mib, err := strconv.ParseInt(strings.TrimSpace(line), 10, 64)
		if err != nil || mib <= 0 || mib > 1<<30 {
			return 0, fmt.Errorf("%w: nvidia-smi printed %q, not a size in MiB; %s", errNoGPU, clip(strings.TrimSpace(line), 80), sizeHint)
		}
		if least == 0 || mib < least {
			least = mib
		}
	}
	if least == 0 {
		return 0, fmt.Errorf("%w: nvidia-smi lists no GPU; %s", errNoGPU, sizeHint)
	}
	return least << 20, nil
}

// runBounded runs bin in a process group of its own and returns its
// standard output. It fails when bin has not finished within gpuDeadline
// (the whole group is killed, so a child holding the output open cannot
// keep it waiting), when bin exits but something it started keeps its
// output open for gpuWaitDelay more, and when it prints more than
// gpuOutputLimit bytes.
func runBounded(bin string, args ...string) ([]byte, error) {
	ctx, cancel := context.WithTimeout(context.Background(), gpuDeadline)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, args...)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return killGroup(cmd) }
	cmd.WaitDelay = gpuWaitDelay
	stdout := &capped{limit: gpuOutputLimit, over: cancel}
	stderr := &capped{limit: 4 << 10}
	cmd.Stdout, cmd.Stderr = stdout, stderr
	err := cmd.Run()
	if errors.Is(err, exec.ErrWaitDelay) {
		// A child that outlived nvidia-smi holds the output: end it too
		// (the group outlives its leader while it has members).
		_ = killGroup(cmd)
	}
	name := "nvidia-smi"
	switch {
	case stdout.overflow.Load():
		return nil, fmt.Errorf("%s printed more than %d bytes; a list of GPU sizes is a few lines", name, gpuOutputLimit)
	case errors.Is(ctx.Err(), context.DeadlineExceeded):
		return nil, fmt.Errorf("%s did not finish within %v and was stopped", name, gpuDeadline)
	case errors.Is(err, exec.ErrWaitDelay):
		return nil, fmt.Errorf("%s exited but a process it started kept its output open", name)
	case err != nil:
		if msg := firstLine(stderr.buf.String()); msg != "" {
			return nil, fmt.Errorf("%s failed (%v: %s)", name, err, clip(msg, 200))
		}
		return nil, fmt.Errorf("%s failed (%v)", name, err)
	}
	return stdout.buf.Bytes(), nil
}

// killGroup kills cmd's process group (cmd runs with Setpgid, so the
// group's id is its process id).
func killGroup(cmd *exec.Cmd) error {
	err := syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	if errors.Is(err, syscall.ESRCH) {
		return nil
	}
	return err
}

// capped keeps the first limit bytes written to it. Past the limit it
// records the overflow, calls over (if set) and fails the write, which
// stops the copy from the pipe; short of an overflow, bytes past the limit
// are dropped (over == nil).
type capped struct {
	buf      bytes.Buffer
	limit    int
	over     func()
	overflow atomic.Bool
}

func (c *capped) Write(p []byte) (int, error) {
	room := c.limit - c.buf.Len()
	if len(p) <= room {
		return c.buf.Write(p)
	}
	if c.over == nil {
		c.buf.Write(p[:max(room, 0)])
		return len(p), nil
	}
	c.overflow.Store(true)
	c.over()
	return 0, errors.New("output over the limit")
}

func firstLine(s string) string {
	s, _, _ = strings.Cut(strings.TrimSpace(s), "\n")
	return strings.TrimSpace(s)
}

// clip shortens s to at most n bytes, marking the cut.
func clip(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "…"
}

// gpuDevice asks nvidia-smi for the first GPU's name and returns its
// Training.GPU value (1 + its index in engine.Devices), or 0 when the
// query fails or the table lacks the GPU: the device is then simply not
// set (the budget already came from the memory query).
func gpuDevice() int {
	bin, err := exec.LookPath("nvidia-smi")
	if err != nil {
		return 0
	}
	out, err := runBounded(bin, "--query-gpu=name", "--format=csv,noheader")
	if err != nil {
		return 0
	}
	d, ok := engine.DeviceFromName(firstLine(string(out)))
	if !ok {
		return 0
	}
	for i, k := range engine.DeviceKeys() {
		if k == d.Key {
			return i + 1
		}
	}
	return 0
}

// given reports whether the flag name was set on the command line.
func given(fs *flag.FlagSet, name string) bool {
	set := false
	fs.Visit(func(f *flag.Flag) { set = set || f.Name == name })
	return set
}
