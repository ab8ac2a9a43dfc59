package cli

import (
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// runWithin runs the command line and fails the test when it has not
// returned within 5 s (reading a named pipe waits for a writer).
func runWithin(t *testing.T, unblock string, args ...string) (string, string, int) {
	t.Helper()
	type result struct {
		out, errs string
		code      int
	}
	done := make(chan result, 1)
	go func() {
		out, errs, code := run(t, "", args...)
		done <- result{out, errs, code}
	}()
	select {
	case r := <-done:
		return r.out, r.errs, r.code
	case <-time.After(5 * time.Second):
		if f, err := os.OpenFile(unblock, os.O_WRONLY|syscall.O_NONBLOCK, 0); err == nil {
			f.Close() // lets a reader stuck opening the pipe go
		}
		t.Fatalf("stackfit %s has not returned after 5s", strings.Join(args, " "))
		return "", "", 0
	}
}

// TestNonRegularInput: report, check and export refuse a named pipe and a
// folder at once (exit 2), saying what the path is and what to do.
func TestNonRegularInput(t *testing.T) {
	dir := t.TempDir()
	fifo := filepath.Join(dir, "net.yaml")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skipf("no named pipes here: %v", err)
	}
	for _, cmd := range []string{"report", "check", "export"} {
		_, errs, code := runWithin(t, fifo, cmd, fifo)
		if code != ExitUsage || !strings.Contains(errs, "stackfit "+cmd+": "+fifo+" is a named pipe, not a stack file") || !strings.Contains(errs, "stackfit report - < "+fifo) {
			t.Errorf("%s on a pipe: exit %d, %q", cmd, code, errs)
		}
		_, errs, code = runWithin(t, fifo, cmd, dir)
		if code != ExitUsage || !strings.Contains(errs, dir+" is a folder, not a stack file") {
			t.Errorf("%s on a folder: exit %d, %q", cmd, code, errs)
		}
	}
}

// TestOutputIsNotInput: -o naming the input — as given, spelled another
// way, through a symbolic link or a hard link — is refused before anything
// is written, and the input is left as it was.
func TestOutputIsNotInput(t *testing.T) {
	dir := t.TempDir()
	data, err := os.ReadFile(example)
	if err != nil {
		t.Fatal(err)
	}
	in := filepath.Join(dir, "f.yaml")
	os.WriteFile(in, data, 0o644)
	os.Symlink(in, filepath.Join(dir, "link.yaml"))
	os.Link(in, filepath.Join(dir, "hard.yaml"))
	outs := []string{in, dir + "/./f.yaml", filepath.Join(dir, "sub", "..", "f.yaml"), filepath.Join(dir, "link.yaml"), filepath.Join(dir, "hard.yaml")}
	os.Mkdir(filepath.Join(dir, "sub"), 0o755)
	for _, cmd := range []string{"report", "export"} {
		for _, o := range outs {
			_, errs, code := run(t, "", cmd, in, "-o", o)
			want := "stackfit " + cmd + ": -o \"" + o + "\" is the input file \"" + in + "\"; stackfit does not write over its input — give -o another name"
			if code != ExitUsage || !strings.Contains(errs, want) {
				t.Errorf("%s %s -o %s: exit %d, %q", cmd, in, o, code, errs)
			}
		}
	}
	if got, _ := os.ReadFile(in); string(got) != string(data) {
		t.Error("the input was changed")
	}
	// Another name is fine.
	if _, errs, code := run(t, "", "report", in, "-o", filepath.Join(dir, "f.txt")); code != ExitOK {
		t.Errorf("exit %d: %s", code, errs)
	}
}

// TestSizeFlagsNeedUnits: a size flag without a unit is refused (it used
// to mean bytes, so --budget 24 checked against 24 bytes), naming the fix;
// with a unit, or B for bytes, it is taken.
func TestSizeFlagsNeedUnits(t *testing.T) {
	tests := []struct {
		flag, value, want string
	}{
		{"--budget", "24", `stackfit check: --budget "24": 24 has no unit; write 24GiB (or 24GB, 24000MiB)`},
		{"--budget", "0.2", `stackfit check: --budget "0.2": 0.2 has no unit; write 0.2GiB (or 0.2GB, 200MiB)`},
		{"--workspace", "512", `stackfit check: --workspace "512": 512 has no unit; write 512GiB (or 512GB, 512000MiB)`},
		{"--overhead", "734003200", `stackfit check: --overhead "734003200": 734003200 has no unit; write 734003200B for bytes (or a size such as 24GiB)`},
		{"--budget", "24GiB", ""},
		{"--overhead", "734003200B", ""},
	}
	for _, tt := range tests {
		_, errs, code := run(t, "", "check", example, tt.flag, tt.value)
		if tt.want == "" && code != ExitOK || tt.want != "" && (code != ExitUsage || !strings.Contains(errs, tt.want)) {
			t.Errorf("%s %s: exit %d, %q; want %q", tt.flag, tt.value, code, errs, tt.want)
		}
	}
}

// TestBudgetZero: --budget 0 (or any size of 0 bytes, or empty) is
// refused with the three ways to say what was meant; --budget none
// removes the file's budget, so check reports no budget.
func TestBudgetZero(t *testing.T) {
	for _, v := range []string{"0", "0GiB", "", "0.2B"} {
		_, errs, code := run(t, "", "check", example, "--budget", v)
		want := `--budget "` + v + `": a budget of 0 bytes holds nothing; give a size such as 24GiB, auto (ask nvidia-smi), or none to check no budget, not even the file's`
		if code != ExitUsage || !strings.Contains(errs, want) {
			t.Errorf("--budget %q: exit %d, %q", v, code, errs)
		}
	}
	// The example file sets budget: 24GiB (engine/examples/fruit-grader.yaml).
	out, errs, code := run(t, "", "check", example, "--budget", "none")
	if code != ExitOK || !strings.Contains(out, "not checked: --budget none removes the file's budget of 24.0 GiB") {
		t.Errorf("--budget none: exit %d, %s%s", code, out, errs)
	}
	out, _, _ = run(t, "", "help", "check")
	if !strings.Contains(out, "GPU memory per device, auto (nvidia-smi) or none") {
		t.Errorf("the help does not offer none:\n%s", out)
	}
}

// TestUnknownCommand: an unknown command, also after help, is a usage
// error that suggests the likely command and lists them all.
func TestUnknownCommand(t *testing.T) {
	tests := []struct{ args, want string }{
		{"reprot", `stackfit: unknown command "reprot"; did you mean "report"? (commands: report, check, export, calibrate, import, scale, sweep, example, help;`},
		{"chek", `unknown command "chek"; did you mean "check"?`},
		{"exmaple", `unknown command "exmaple"; did you mean "example"?`},
		{"ex", `unknown command "ex" (commands:`},                // export or example: no guess
		{"exp", `unknown command "exp"; did you mean "export"?`}, // the one command it begins
		{"rep", `unknown command "rep"; did you mean "report"?`},
		{"zzz", `unknown command "zzz" (commands: report, check, export, calibrate, import, scale, sweep, example, help;`},
		{"help NOSUCH", `stackfit help: no command is called "NOSUCH"; the commands: report, check, export, calibrate, import, scale, sweep, example, help`},
		{"help exprot", `stackfit help: no command is called "exprot"; did you mean "export"?; the commands:`},
		{"--help chekc", `no command is called "chekc"; did you mean "check"?`},
	}
	for _, tt := range tests {
		out, errs, code := run(t, "", strings.Fields(tt.args)...)
		if code != ExitUsage || !strings.Contains(errs, tt.want) || out != "" {
			t.Errorf("stackfit %s: exit %d, stdout %q, stderr %q; want %q", tt.args, code, out, errs, tt.want)
		}
	}
	for _, args := range []string{"help", "help help", "help --help", "help report", "help example"} {
		if out, errs, code := run(t, "", strings.Fields(args)...); code != ExitOK || !strings.HasPrefix(out, "usage: stackfit") && !strings.HasPrefix(out, "stackfit —") {
			t.Errorf("stackfit %s: exit %d, %q %q", args, code, out, errs)
		}
	}
}
