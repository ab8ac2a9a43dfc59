package cli

import (
	"strings"
	"testing"
	"unicode/utf8"

	"stackfit/engine"
)

// TestTrainingUsageFromSettings: the flags' help lists every setting of
// engine.Settings with its help and example, no line wider than a
// terminal's 80 columns.
func TestTrainingUsageFromSettings(t *testing.T) {
	out, _, _ := run(t, "", "help", "report")
	for i, l := range strings.Split(out, "\n") {
		if n := utf8.RuneCountInString(l); n > usageWidth {
			t.Errorf("help line %d is %d columns, past %d: %q", i+1, n, usageWidth, l)
		}
	}
	out = strings.Join(strings.Fields(out), " ") // the help is wrapped
	for _, s := range engine.Settings() {
		if !strings.Contains(out, "--"+s.Key+" ") || !strings.Contains(out, s.Help) || !strings.Contains(out, "e.g. --"+s.Key+" "+cliExample(s)) {
			t.Errorf("report help lacks %s (%q, e.g. %s)", s.Key, s.Help, s.Example)
		}
	}
}

// TestTrainingFlagErrors: a refused flag names the flag, the value and the
// fix (the bounds are stackfit's own limits, engine.MaxBatch and the rest).
func TestTrainingFlagErrors(t *testing.T) {
	tests := []struct{ flag, value, want string }{
		{"--batch", "0", `--batch "0": give a whole number from 1 to 16777216`},
		{"--accumulate", "65537", `--accumulate "65537": give a whole number from 1 to 65536`},
		{"--shard", "params", `--shard "params": give one of none, optimizer, gradients, parameters`},
		{"--workspace", "big", `--workspace "big": give a size such as 24GiB, 24GB or 24000MiB (empty: default)`},
		{"--headroom", "95%", `--headroom "95%": give a share from 0% to 90%, e.g. 10%`},
	}
	for _, tt := range tests {
		_, errs, code := run(t, "", "report", example, tt.flag, tt.value)
		if code != ExitUsage || !strings.Contains(errs, tt.want) {
			t.Errorf("%s %s: exit %d, stderr %q; want %s", tt.flag, tt.value, code, errs, tt.want)
		}
	}
}

// TestHelpFitsTerminal: every command's help, and the top-level one, fits
// a terminal of usageWidth columns (common practice: 80), so that no line
// wraps mid-word on the training box's console.
func TestHelpFitsTerminal(t *testing.T) {
	for _, cmd := range []string{"", "report", "check", "export", "calibrate", "import", "scale", "sweep", "example"} {
		args := []string{"help"}
		if cmd != "" {
			args = append(args, cmd)
		}
		out, errs, _ := run(t, "", args...)
		text := out + errs
		if len(text) < 200 {
			t.Fatalf("help %s: %q is not the help", cmd, text)
		}
		for i, l := range strings.Split(text, "\n") {
			if n := utf8.RuneCountInString(l); n > usageWidth {
				t.Errorf("help %s, line %d is %d columns, past %d: %q", cmd, i+1, n, usageWidth, l)
			}
		}
	}
}
