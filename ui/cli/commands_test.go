package cli

import (
	"encoding/csv"
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestCheck checks the CI command's lines and exit codes.
func TestCheck(t *testing.T) {
	bad := "stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: 9}]\n"
	warn := "stackfit: 1\ninput: [3, 32, 32]\nlayers: [{conv: 30, kernel: 3, pad: 1}, global-pool, {dense: 10}]\n"
	// A small segmenter: a 3×3 conv, 1×1 convs and a per-pixel 1×1
	// classifier on a 64×64 input, each output seeing a 3×3 patch.
	seg := "stackfit: 1\ninput: [3, 64, 64]\nlayers: [{conv: 16, kernel: 3, pad: 1}, {conv: 16, kernel: 1}, {conv: 16, kernel: 1}, {conv: 8, kernel: 1}]\n"
	tests := []struct {
		name  string
		stdin string
		args  []string
		code  int
		lines []string
	}{
		{"clean and fits", "", []string{"check", example}, ExitOK,
			[]string{"fruit-grader.yaml: memory: fits: 1.26 GiB of 24.0 GiB per GPU with 10% kept free, at batch 256 (estimate)", "fruit-grader.yaml: 0 error(s), 0 warning(s)"}},
		{"does not fit", "", []string{"check", example, "--budget", "1GiB"}, ExitProblems,
			[]string{"memory: does not fit: 1.26 GiB of 1.00 GiB per GPU with 10% kept free, at batch 256 (estimate); largest category overhead; largest batch that fits 70"}},
		{"errors", bad, []string{"check", "-"}, ExitProblems,
			[]string{"<stdin>: error: layer 1 (conv): kernel height spans 9 pixels but the padded input height is only 8", "<stdin>: memory: not estimated: the stack has 1 error(s)"}},
		{"warnings pass", warn, []string{"check", "-"}, ExitOK,
			[]string{"<stdin>: warning: layer 1 (conv): filters 30 is not a multiple of 8", "no budget to check against"}},
		{"warnings fail when strict", warn, []string{"check", "-", "--strict"}, ExitProblems, nil},
		{"a per-pixel output passes strict", seg, []string{"check", "-", "--strict"}, ExitOK,
			[]string{"<stdin>: 0 error(s), 0 warning(s)"}},
		{"silenced warnings pass strict", "quiet: [channels-not-multiple-of-8, parameter-heavy-layer]\n" + warn, []string{"check", "-", "--strict"}, ExitOK,
			[]string{"<stdin>: silenced by the file's quiet: list: channels-not-multiple-of-8, parameter-heavy-layer", "<stdin>: 0 error(s), 0 warning(s)"}},
		{"a misspelt silenced warning", "quiet: [channels-not-multiple-of-eight]\n" + warn, []string{"check", "-"}, ExitUsage,
			[]string{}},
		{"bad usage", "", []string{"check"}, ExitUsage, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out, errs, code := run(t, tt.stdin, tt.args...)
			if code != tt.code {
				t.Errorf("exit %d, want %d\n%s%s", code, tt.code, out, errs)
			}
			for _, l := range tt.lines {
				if !strings.Contains(out, l) {
					t.Errorf("output lacks %q:\n%s", l, out)
				}
			}
		})
	}
}

// TestBudgetAuto puts a fake nvidia-smi first on PATH.
func TestBudgetAuto(t *testing.T) {
	dir := t.TempDir()
	fake := filepath.Join(dir, "nvidia-smi")
	os.WriteFile(fake, []byte("#!/bin/sh\necho 81559\necho 40960\n"), 0o755)
	t.Setenv("PATH", dir+string(os.PathListSeparator)+os.Getenv("PATH"))
	out, errs, code := run(t, "", "check", example, "--budget", "auto")
	if code != ExitOK || !strings.Contains(out, "of 40.0 GiB per GPU") {
		t.Errorf("exit %d: %s%s", code, out, errs)
	}
	os.WriteFile(fake, []byte("#!/bin/sh\necho 'No devices were found'\n"), 0o755)
	_, errs, code = run(t, "", "report", example, "--budget", "auto")
	if code != ExitUsage || !strings.Contains(errs, `--budget auto: no GPU memory found: nvidia-smi printed "No devices were found"`) {
		t.Errorf("exit %d: %s", code, errs)
	}
	t.Setenv("PATH", dir) // no nvidia-smi and nothing else
	os.Remove(fake)
	_, errs, code = run(t, "", "report", example, "--budget", "auto")
	if code != ExitUsage || !strings.Contains(errs, "nvidia-smi is not on PATH; give the budget as a size instead, e.g. --budget 24GiB") {
		t.Errorf("exit %d: %s", code, errs)
	}
}

// TestMarkdownTable parses the markdown report back as a table.
func TestMarkdownTable(t *testing.T) {
	out, _, code := run(t, "", "report", "../../testdata/examples/cap-inspector.yaml", "--format", "markdown")
	if code != ExitOK {
		t.Fatal(code)
	}
	var rows [][]string
	in := false
	for _, line := range strings.Split(out, "\n") {
		if strings.HasPrefix(line, "| at |") {
			in = true
		}
		if in && line == "" {
			break
		}
		if in && !strings.HasPrefix(line, "| ---") {
			rows = append(rows, splitRow(line))
		}
	}
	if len(rows) < 10 {
		t.Fatalf("found %d table rows:\n%s", len(rows), out)
	}
	for i, r := range rows {
		if len(r) != 7 {
			t.Errorf("row %d has %d cells: %q", i, len(r), r)
		}
	}
	if !strings.Contains(out, "| --- | --- | --- |") || !strings.Contains(out, "_Estimates:") {
		t.Error("no separator line or caution")
	}
}

// splitRow splits a markdown table row, honouring escaped pipes.
func splitRow(line string) []string {
	line = strings.TrimSpace(line)
	line = strings.TrimPrefix(strings.TrimSuffix(line, "|"), "|")
	var cells []string
	var cur strings.Builder
	for i := 0; i < len(line); i++ {
		switch {
		case line[i] == '\\' && i+1 < len(line):
			cur.WriteByte(line[i+1])
			i++
		case line[i] == '|':
			cells = append(cells, strings.TrimSpace(cur.String()))
			cur.Reset()
		default:
			cur.WriteByte(line[i])
		}
	}
	return append(cells, strings.TrimSpace(cur.String()))
}

// TestCSVMatchesJSON parses the CSV report and compares it with the JSON.
func TestCSVMatchesJSON(t *testing.T) {
	file := "../../testdata/published/resnet18.yaml"
	csvOut, _, _ := run(t, "", "report", file, "--format", "csv")
	jsonOut, _, _ := run(t, "", "report", file, "--format", "json")
	recs, err := csv.NewReader(strings.NewReader(csvOut)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Layers []struct {
			Path                  string
			Params, Buffers, MACs int64
			Out                   *[3]int64
			ActBytes              int64 `json:"act_bytes"`
		}
	}
	json.Unmarshal([]byte(jsonOut), &doc)
	if len(recs) != len(doc.Layers)+1 {
		t.Fatalf("%d CSV lines for %d layers", len(recs), len(doc.Layers))
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	num := func(r []string, c string) int64 {
		v, err := strconv.ParseInt(r[col[c]], 10, 64)
		if err != nil {
			t.Fatalf("%s %q: %v", c, r[col[c]], err)
		}
		return v
	}
	for i, l := range doc.Layers {
		r := recs[i+1]
		if r[col["path"]] != l.Path || num(r, "params") != l.Params || num(r, "MACs") != l.MACs ||
			num(r, "buffers") != l.Buffers || num(r, "out C") != l.Out[0] || num(r, "act bytes") != l.ActBytes {
			t.Errorf("CSV row %d %v differs from JSON %+v", i+1, r, l)
		}
	}
}

// TestHelpListsFlags checks every command's --help lists its flags with an
// example.
func TestHelpListsFlags(t *testing.T) {
	for _, cmd := range []string{"report", "check", "export"} {
		out, _, code := run(t, "", cmd, "--help")
		if code != ExitOK {
			t.Errorf("%s --help: exit %d", cmd, code)
		}
		for _, flag := range []string{"--batch", "--precision", "--optimizer", "--budget", "--gpus", "--shard", "--accumulate", "--checkpoint", "--workspace", "--overhead", "--headroom", "e.g.", "examples:"} {
			if !strings.Contains(out, flag) {
				t.Errorf("%s --help lacks %s", cmd, flag)
			}
		}
		alt, _, _ := run(t, "", "help", cmd)
		if alt != out {
			t.Errorf("help %s differs from %s --help", cmd, cmd)
		}
	}
	out, _, _ := run(t, "", "--help")
	for _, want := range []string{"report", "check", "export", "exit status"} {
		if !strings.Contains(out, want) {
			t.Errorf("stackfit --help lacks %q", want)
		}
	}
}

func TestExportCommand(t *testing.T) {
	p := filepath.Join(t.TempDir(), "net.py")
	_, errs, code := run(t, "", "export", example, "--to", "pytorch", "-o", p)
	if code != ExitOK {
		t.Fatalf("exit %d: %s", code, errs)
	}
	data, _ := os.ReadFile(p)
	if !strings.Contains(string(data), "class FruitGrader(nn.Module):") {
		t.Errorf("module:\n%s", data)
	}
	_, errs, code = run(t, "", "export", example, "--to", "keras")
	if code != ExitUsage || !strings.Contains(errs, `--to "keras" is not supported`) {
		t.Errorf("exit %d: %s", code, errs)
	}
	_, errs, code = run(t, "stackfit: 1\ninput: [3, 8, 8]\nlayers: [{conv: 8, kernel: 9}]\n", "export", "-")
	if code != ExitProblems || !strings.Contains(errs, "has 1 error(s)") {
		t.Errorf("exit %d: %s", code, errs)
	}
}

// TestExampleCommand lists, prints and writes the built-in examples, and
// refuses an unknown name and an existing file.
func TestExampleCommand(t *testing.T) {
	out, _, code := run(t, "", "example")
	if code != ExitOK || !strings.Contains(out, "fruit-grader-board") || !strings.Contains(out, "fruit-grader ") {
		t.Errorf("list (exit %d):\n%s", code, out)
	}
	out, _, code = run(t, "", "example", "fruit-grader-board")
	if code != ExitOK || !strings.HasPrefix(out, "stackfit: 1\nname: Fruit grader on the camera board\n") {
		t.Errorf("print (exit %d):\n%s", code, out)
	}
	_, errs, code := run(t, "", "example", "fruit")
	if code != ExitUsage || !strings.Contains(errs, `no example is called "fruit"; the examples: fruit-grader, fruit-grader-board, cap-inspector`) {
		t.Errorf("unknown name (exit %d): %s", code, errs)
	}
	p := filepath.Join(t.TempDir(), "board.yaml")
	if _, errs, code := run(t, "", "example", "fruit-grader-board", "-o", p); code != ExitOK {
		t.Fatalf("write (exit %d): %s", code, errs)
	}
	if _, errs, code := run(t, "", "check", p); code != ExitOK {
		t.Errorf("the written example does not check clean (exit %d): %s", code, errs)
	}
	if err := os.WriteFile(p, []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, errs, code = run(t, "", "example", "fruit-grader", "-o", p)
	if data, _ := os.ReadFile(p); code != ExitUsage || string(data) != "mine" || !strings.Contains(errs, "already exists") {
		t.Errorf("an existing file (exit %d, now %q): %s", code, data, errs)
	}
}

// TestNotEstimatedEverywhere: one rule for a stack with errors in every
// output — the memory is not estimated, and no output gives a verdict
// (the partial totals once read "fits; 4.97 GiB left" in the text report,
// "fits": true in JSON, and raised a share-of-parameters warning).
func TestNotEstimatedEverywhere(t *testing.T) {
	broken := "stackfit: 1\ninput: [3, 32, 32]\ntraining: {batch: 8, budget: 24GiB}\n" +
		"layers: [{conv: 8, kernel: 3, pad: 1}, {conv: 64, kernel: 3, pad: 1}, {conv: 8, kernel: 99}, {conv: 512, kernel: 3}]\n"
	const says = "memory not estimated: the stack has 1 error(s)"
	tests := []struct {
		args    []string
		want    string
		notWant []string
	}{
		{[]string{"report", "-"}, says, []string{"fits", "left", "holds"}},
		{[]string{"report", "-", "--format", "markdown"}, says, []string{"fits", "holds"}},
		{[]string{"report", "-", "--format", "json"}, `"estimated":false,"reason":"the stack has 1 error(s)"`, []string{`"fits":true`, `"fit": {`, "holds"}},
		{[]string{"check", "-"}, "<stdin>: memory: not estimated: the stack has 1 error(s)", []string{"fits", "holds"}},
	}
	for _, tt := range tests {
		out, errs, code := run(t, broken, tt.args...)
		if code != ExitProblems || !strings.Contains(out, tt.want) {
			t.Errorf("%v: exit %d, lacks %q:\n%s%s", tt.args, code, tt.want, out, errs)
		}
		for _, w := range tt.notWant {
			if strings.Contains(out, w) {
				t.Errorf("%v: has %q:\n%s", tt.args, w, out)
			}
		}
	}
}
