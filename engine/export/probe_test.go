package export

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"os/exec"
	"testing"
)

// referenceEnv turns on the reference suite: the checks that start
// Python (Debian's python3-torch, python3-torchvision, python3-onnx). The
// README's test command leaves them out to stay fast; .ci/run sets it.
const referenceEnv = "STACKFIT_REFERENCE"

// needReference skips a check that starts Python unless the reference
// suite was asked for.
func needReference(t *testing.T) {
	t.Helper()
	if os.Getenv(referenceEnv) != "1" {
		t.Skip("reference suite (starts PyTorch): run with " + referenceEnv + "=1, as .ci/run does")
	}
}

// metaPython lets a probe build modules on PyTorch's meta device: shapes
// by PyTorch's own rules, no weight initialisation, no arithmetic.
const metaPython = `class MetaFactories(torch.overrides.TorchFunctionMode):
    """New tensors on the meta device (what torch.device("meta") does as a
    context manager from PyTorch 2.0 on): building a module allocates
    nothing and skips the weight initialisation's arithmetic."""

    FACTORIES = (torch.empty, torch.zeros, torch.ones, torch.full, torch.tensor,
                 torch.rand, torch.randn, torch.arange)

    def __torch_function__(self, func, types, args=(), kwargs=None):
        kwargs = dict(kwargs or {})
        if func in self.FACTORIES:
            kwargs["device"] = "meta"
        return func(*args, **kwargs)


def on_meta():
    if hasattr(torch.device, "__enter__"):
        return torch.device("meta")
    return MetaFactories()
`

// runPython runs a probe script once over every case (one JSON line each
// on its standard input) and returns its answers (one JSON line each) by
// name. An exit status listed in skips skips the test with its reason, as
// a missing python3 does with skips[probeNoTorch].
func runPython[C, R any](t *testing.T, script string, cases []C, skips map[int]string, name func(R) string) map[string]R {
	t.Helper()
	var in bytes.Buffer
	enc := json.NewEncoder(&in)
	for _, c := range cases {
		if err := enc.Encode(c); err != nil {
			t.Fatal(err)
		}
	}
	cmd := exec.Command(python, "-c", script)
	cmd.Stdin = &in
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	var ee *exec.ExitError
	switch {
	case errors.Is(err, os.ErrNotExist):
		t.Skip(skips[probeNoTorch])
	case errors.As(err, &ee) && skips[ee.ExitCode()] != "":
		t.Skip(skips[ee.ExitCode()])
	case err != nil:
		t.Fatalf("the probe failed: %v\n%s", err, stderr.String())
	}
	got := map[string]R{}
	sc := bufio.NewScanner(bytes.NewReader(out))
	sc.Buffer(nil, 1<<22)
	for sc.Scan() {
		var r R
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatalf("probe line %q: %v", sc.Text(), err)
		}
		got[name(r)] = r
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return got
}
