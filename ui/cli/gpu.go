package cli

import (
	"context"
	"errors"
	"fmt"
	"os/exec"
	"strconv"
	"strings"
	"time"
)

// errNoGPU says why --budget auto found no GPU memory.
var errNoGPU = errors.New("no GPU memory found")

// gpuMemory asks nvidia-smi for the total memory of the local GPUs and
// returns the smallest (data-parallel training is limited by it), in bytes.
func gpuMemory() (int64, error) {
	bin, err := exec.LookPath("nvidia-smi")
	if err != nil {
		return 0, fmt.Errorf("%w: nvidia-smi is not on PATH; give the budget as a size instead, e.g. --budget 24GiB", errNoGPU)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	out, err := exec.CommandContext(ctx, bin, "--query-gpu=memory.total", "--format=csv,noheader,nounits").Output()
	if err != nil {
		return 0, fmt.Errorf("%w: nvidia-smi failed (%v); give the budget as a size, e.g. --budget 24GiB", errNoGPU, err)
	}
	var least int64
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		mib, err := strconv.ParseInt(strings.TrimSpace(line), 10, 64)
		if err != nil || mib <= 0 || mib > 1<<30 {
			return 0, fmt.Errorf("%w: nvidia-smi printed %q, not a size in MiB", errNoGPU, strings.TrimSpace(line))
		}
		if least == 0 || mib < least {
			least = mib
		}
	}
	if least == 0 {
		return 0, fmt.Errorf("%w: nvidia-smi lists no GPU", errNoGPU)
	}
	return least << 20, nil
}
