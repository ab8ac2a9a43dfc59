package cli

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/charmbracelet/x/exp/golden"
)

func run(t *testing.T, stdin string, args ...string) (string, string, int) {
	t.Helper()
	var out, errb bytes.Buffer
	code := Run(args, IO{In: strings.NewReader(stdin), Out: &out, Err: &errb})
	return out.String(), errb.String(), code
}

const example = "../../engine/examples/fruit-grader.yaml"

func TestNoArgsShowsExample(t *testing.T) {
	out, _, code := run(t, "")
	if code != ExitOK {
		t.Fatalf("exit %d", code)
	}
	golden.RequireEqual(t, []byte(out)) // testdata/TestNoArgsShowsExample.golden
}

func TestReportJSON(t *testing.T) {
	out, errs, code := run(t, "", "report", example, "--format", "json")
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	golden.RequireEqual(t, []byte(out)) // testdata/TestReportJSON.golden
	var doc map[string]any
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"name", "input", "layers", "totals"} {
		if _, ok := doc[k]; !ok {
			t.Errorf("JSON lacks %q", k)
		}
	}
}

func TestExitCodes(t *testing.T) {
	bad := "stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: 9}]\n"
	tests := []struct {
		name  string
		stdin string
		args  []string
		code  int
		err   string
	}{
		{"clean file", "", []string{"report", example}, ExitOK, ""},
		{"stack with errors", bad, []string{"report", "-", "--format", "json"}, ExitProblems, ""},
		{"missing file", "", []string{"report", "nope.yaml"}, ExitUsage, "open stack file"},
		{"bad format", "", []string{"report", example, "--format", "xml"}, ExitUsage, `--format "xml" is not known`},
		{"no file", "", []string{"report"}, ExitUsage, "give exactly one stack file"},
		{"unknown flag", "", []string{"report", example, "--colour"}, ExitUsage, "flag provided but not defined"},
		{"unknown command", "", []string{"reprot"}, ExitUsage, `unknown command "reprot"`},
		{"unreadable stdin", "input: [", []string{"report", "-"}, ExitUsage, "<stdin>:1:1: not valid YAML"},
		{"help", "", []string{"--help"}, ExitOK, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, errs, code := run(t, tt.stdin, tt.args...)
			if code != tt.code {
				t.Errorf("exit %d, want %d (stderr %q)", code, tt.code, errs)
			}
			if !strings.Contains(errs, tt.err) {
				t.Errorf("stderr %q lacks %q", errs, tt.err)
			}
		})
	}
}

func TestReportToFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "r.json")
	_, errs, code := run(t, "", "report", "-o", p, example, "--format=json")
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	data, err := os.ReadFile(p)
	if err != nil || !json.Valid(data) {
		t.Fatalf("report file: %v", err)
	}
}

// TestTrainingFlags checks that flags override the file's training section
// and that bad values name the flag.
func TestTrainingFlags(t *testing.T) {
	out, errs, code := run(t, "", "report", example, "--format", "json", "--batch", "64", "--precision", "fp32",
		"--optimizer", "sgd", "--gpus", "2", "--shard", "optimizer", "--budget", "8GiB", "--headroom", "20%")
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var doc struct {
		Memory struct {
			Setup struct {
				Batch, MicroBatch, GPUs int64
				Precision, Optimizer    string
			} `json:"setup"`
			Budget, Reserve int64
		} `json:"memory"`
		Fit *struct {
			MaxBatch struct {
				Value float64
				Limit string
			} `json:"max_batch"`
		} `json:"fit"`
	}
	if err := json.Unmarshal([]byte(out), &doc); err != nil {
		t.Fatal(err)
	}
	m := doc.Memory
	if m.Setup.Batch != 64 || m.Setup.GPUs != 2 || m.Setup.Precision != "fp32" || m.Setup.Optimizer != "sgd" || m.Budget != 8<<30 || m.Reserve != (8<<30)/5+1 { // 20% rounded up
		t.Errorf("memory %+v", m)
	}
	if doc.Fit == nil || doc.Fit.MaxBatch.Value < 64 || doc.Fit.MaxBatch.Limit != "activations" {
		t.Errorf("fit %+v", doc.Fit)
	}
	for _, bad := range [][]string{{"--batch", "0"}, {"--precision", "fp8"}, {"--budget", "lots"}, {"--headroom", "2"}} {
		_, errs, code := run(t, "", append([]string{"report", example}, bad...)...)
		if code != ExitUsage || !strings.Contains(errs, bad[0]) {
			t.Errorf("%v: exit %d, stderr %q", bad, code, errs)
		}
	}
}
