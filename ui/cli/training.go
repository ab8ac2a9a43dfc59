package cli

import (
	"errors"
	"flag"
	"fmt"
	"strings"
	"unicode/utf8"

	"stackfit/engine"
)

// trainingFlags registers one flag per training setting (engine.Settings);
// apply overrides the stack file's settings with the flags the user gave.
type trainingFlags struct {
	fs   *flag.FlagSet
	skip map[string]bool // flags a command reads itself (sweep's lists of batches and precisions)
}

func addTrainingFlags(fs *flag.FlagSet) trainingFlags {
	for _, s := range engine.Settings() {
		fs.String(s.Key, "", flagHelp(s)+", e.g. "+cliExample(s))
	}
	return trainingFlags{fs: fs}
}

// flagHelp is a setting's help on the command line, where the budget can
// also be asked of nvidia-smi, or removed.
func flagHelp(s engine.Setting) string {
	if s.Key == "budget" {
		return s.Help + ", auto (nvidia-smi) or none"
	}
	return s.Help
}

// cliExample is a setting's example as a shell takes it: quoted when it
// holds spaces (the efficiency list).
func cliExample(s engine.Setting) string {
	if strings.Contains(s.Example, " ") {
		return `"` + s.Example + `"`
	}
	return s.Example
}

// usageWidth is the width the flags' help is wrapped to: a terminal's
// 80 columns (common practice for command-line help).
const usageWidth = 80

// trainingUsage lists the training flags for the commands' help as the
// commands' own flags are listed: each flag, its help wrapped to
// usageWidth under the help's column, and an example after three spaces
// on the last line, or on a line of its own when it does not fit.
func trainingUsage() string {
	type line struct{ flag, help, example string }
	var lines []line
	flagW := 0
	for _, s := range engine.Settings() {
		l := line{"--" + s.Key + " " + placeholder(s.Kind), flagHelp(s), "e.g. --" + s.Key + " " + cliExample(s)}
		flagW = max(flagW, len(l.flag))
		lines = append(lines, l)
	}
	indent := 2 + flagW + 2
	width := max(usageWidth-indent, 30)
	var b strings.Builder
	b.WriteString("\ntraining flags (report, check, export, scale, sweep; they override the\nfile's training section):\n")
	for _, l := range lines {
		text := wrapWords(l.help, width)
		if last := &text[len(text)-1]; utf8.RuneCountInString(*last)+3+utf8.RuneCountInString(l.example) <= width {
			*last += "   " + l.example
		} else {
			text = append(text, wrapWords(l.example, width)...)
		}
		for i, t := range text {
			if i == 0 {
				fmt.Fprintf(&b, "  %-*s  %s\n", flagW, l.flag, t)
			} else {
				fmt.Fprintf(&b, "%*s%s\n", indent, "", t)
			}
		}
	}
	return b.String()
}

// wrapWords breaks text at spaces into lines of at most width runes (a
// longer word stands alone on its line).
func wrapWords(text string, width int) []string {
	var out []string
	cur := ""
	for _, w := range strings.Fields(text) {
		switch {
		case cur == "":
			cur = w
		case utf8.RuneCountInString(cur)+1+utf8.RuneCountInString(w) <= width:
			cur += " " + w
		default:
			out = append(out, cur)
			cur = w
		}
	}
	return append(out, cur)
}

// placeholder names a flag's value in the help.
func placeholder(k engine.SettingKind) string {
	switch k {
	case engine.SettingCount:
		return "N"
	case engine.SettingChoice:
		return "NAME"
	case engine.SettingSize:
		return "SIZE"
	case engine.SettingText:
		return "LIST"
	}
	return "SHARE"
}

// apply returns t with every given flag applied, or an error naming the flag.
func (tf trainingFlags) apply(t engine.Training) (engine.Training, error) {
	var err error
	tf.fs.Visit(func(f *flag.Flag) {
		s, ok := engine.SettingFor(f.Name)
		if err != nil || !ok || tf.skip[f.Name] {
			return
		}
		v := f.Value.String()
		if s.Key == "budget" {
			switch strings.ToLower(strings.TrimSpace(v)) {
			case "auto":
				if t.Budget, err = gpuMemory(); err != nil {
					err = fmt.Errorf("--budget auto: %w", err)
				}
				if err == nil && t.GPU == 0 && tf.fs.Lookup("gpu") != nil && !given(tf.fs, "gpu") {
					t.GPU = gpuDevice() // the device too, when nvidia-smi names one the table knows
				}
				return
			case "none": // no budget, even one the file sets
				t.Budget = 0
				return
			}
			// 0 is refused rather than read as "no budget": a slip (an
			// empty variable, a unit lost) would drop the file's budget
			// and turn a failing check into a pass.
			u := t
			if s.Parse(&u, v) == nil && u.Budget == 0 {
				err = fmt.Errorf("--budget %q: a budget of 0 bytes holds nothing; give a size such as 24GiB, auto (ask nvidia-smi), or none to check no budget, not even the file's", v)
				return
			}
		}
		if perr := s.Parse(&t, v); perr != nil {
			var fe *engine.FieldError
			if errors.As(perr, &fe) {
				err = fmt.Errorf("--%s %q: %s", s.Key, v, fe.Want)
			} else {
				err = fmt.Errorf("--%s: %w", s.Key, perr)
			}
		}
	})
	return t, err
}
