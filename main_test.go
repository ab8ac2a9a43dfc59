package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"stackfit/engine"
	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
	"stackfit/ui/store"
)

// term drives one tmux server for a test.
type term struct {
	t    *testing.T
	tmux string
	sock string
}

func newTerm(t *testing.T, dir string) *term {
	tmux, err := exec.LookPath("tmux")
	if err != nil {
		t.Skip("tmux is not installed (apt-get install tmux); .ci/run installs it")
	}
	tm := &term{t: t, tmux: tmux, sock: filepath.Join(dir, "tmux.sock")}
	t.Cleanup(func() { exec.Command(tmux, "-S", tm.sock, "kill-server").Run() })
	return tm
}

func (tm *term) run(args ...string) string {
	out, err := exec.Command(tm.tmux, append([]string{"-S", tm.sock}, args...)...).CombinedOutput()
	if err != nil {
		tm.t.Fatalf("tmux %v: %v\n%s", args, err, out)
	}
	return string(out)
}

func (tm *term) start(session string, dir string, cmd ...string) {
	args := []string{"new-session", "-d", "-s", session, "-x", "100", "-y", "30",
		"env", "STACKFIT_KEYS=" + filepath.Join(dir, "none.yaml"), "XDG_STATE_HOME=" + dir, "TERM=xterm-256color"}
	tm.run(append(args, cmd...)...)
}

func (tm *term) waitFor(session, text string) string {
	tm.t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for {
		s := tm.run("capture-pane", "-p", "-t", session)
		if strings.Contains(s, text) {
			return s
		}
		if time.Now().After(deadline) {
			tm.t.Fatalf("screen never showed %q:\n%s", text, s)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

func (tm *term) keys(session string, k ...string) {
	for _, key := range k {
		tm.run("send-keys", "-t", session, key)
		time.Sleep(30 * time.Millisecond)
	}
}

func build(t *testing.T, dir string) string {
	bin := filepath.Join(dir, "stackfit")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	return bin
}

// TestCrashRecovery edits a file, kills the editor with SIGKILL, reopens
// the file, restores the unsaved edits and saves them.
func TestCrashRecovery(t *testing.T) {
	dir := t.TempDir()
	tm := newTerm(t, dir)
	bin := build(t, dir)
	file := filepath.Join(dir, "grader.yaml")
	os.WriteFile(file, examples.FruitGrader(), 0o644)
	tm.start("one", dir, bin, file)
	tm.waitFor("one", "Fruit grader")
	tm.keys("one", "j", "j", "n")
	tm.waitFor("one", "added a stage")
	tm.keys("one", "home", ">")
	tm.waitFor("one", "widened conv 32")
	pid := strings.TrimSpace(tm.run("display-message", "-p", "-t", "one", "#{pane_pid}"))
	if out, err := exec.Command("kill", "-9", pid).CombinedOutput(); err != nil {
		t.Fatalf("kill -9 %s: %v %s", pid, err, out)
	}
	time.Sleep(200 * time.Millisecond)
	// The file is untouched; the journal holds the edits.
	if data, _ := os.ReadFile(file); string(data) != string(examples.FruitGrader()) {
		t.Fatal("the file changed without a save")
	}
	// The killed session left its own journal, which says it is whole
	// and made on the file as it is.
	found := store.FindJournals(file, dir, examples.FruitGrader())
	if len(found) != 1 || !found[0].Trusted() || found[0].Live {
		t.Fatalf("journals: %+v", found)
	}
	kept := found[0].Stack
	if len(kept.Layers) != 28 || kept.Layers[0].Filters != 64 { // 27 items and the stage's block
		t.Fatalf("journal holds %d layers", len(kept.Layers))
	}
	tm.start("two", dir, bin, file)
	tm.waitFor("two", "restore them? (y: restore · n: discard")
	tm.keys("two", "y")
	tm.waitFor("two", "restored the unsaved edits")
	tm.keys("two", "w")
	tm.waitFor("two", "saved grader.yaml")
	tm.keys("two", "q")
	saved, err := store.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	a, _ := stackfile.Save(saved)
	b, _ := stackfile.Save(kept)
	if string(a) != string(b) {
		t.Errorf("restored and saved stack differs from the edits made before the kill")
	}
	if _, err := os.Stat(found[0].Path); !os.IsNotExist(err) {
		t.Error("the killed session's journal outlived the restore and save")
	}
	// The second session removes its journal as it quits; on a busy
	// machine that can take a moment after the key.
	left := store.FindJournals(file, dir, nil)
	for end := time.Now().Add(10 * time.Second); len(left) != 0 && time.Now().Before(end); left = store.FindJournals(file, dir, nil) {
		time.Sleep(50 * time.Millisecond)
	}
	if len(left) != 0 {
		t.Errorf("journals left after the save: %+v", left)
	}
}

// TestRealTerminal builds the binary, runs the editor in tmux, inserts a
// stage, widens a layer, undoes the widen and saves; it then reads the
// screen with capture-pane and the saved YAML, and checks both.
func TestRealTerminal(t *testing.T) {
	dir := t.TempDir()
	tm := newTerm(t, dir)
	bin := build(t, dir)
	file := filepath.Join(dir, "grader.yaml")
	if err := os.WriteFile(file, examples.FruitGrader(), 0o644); err != nil {
		t.Fatal(err)
	}
	const session = "edit"
	tm.start(session, dir, bin, file)
	waitFor := func(text string) string { t.Helper(); return tm.waitFor(session, text) }
	keys := func(k ...string) { tm.keys(session, k...) }
	waitFor("Fruit grader")
	keys("j", "j", "n")
	waitFor("added a stage")
	keys("j", ">") // the stage's first convolution, inside its block
	waitFor("widened conv 64")
	keys("u")
	waitFor("undid: widened")
	keys("w")
	s := waitFor("saved grader.yaml")
	for _, want := range []string{"30 layers, 1 block", "block ×3", "conv 64 k3 s2 p1 nobias", "fits · memory"} {
		if !strings.Contains(s, want) {
			t.Errorf("screen lacks %q:\n%s", want, s)
		}
	}
	keys("q")
	saved, err := store.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if len(saved.Layers) != 28 {
		t.Errorf("saved %d items, want 28 (27 and the stage)", len(saved.Layers))
	}
	// The stage: a block of three repeats of a stride-2 convolution to 64
	// channels (later repeats run with stride 1), norm and act; the undone
	// widen left it at 64.
	if b := saved.Layers[3]; b.Kind != engine.KindBlock || b.Repeat != 3 || len(b.Body) != 3 || b.Body[0].Filters != 64 || b.Body[0].Stride.H != 2 {
		t.Errorf("stage %+v", b)
	}
	// The file is in canonical form and reloads identically.
	data, _ := os.ReadFile(file)
	again, _ := stackfile.Save(saved)
	if string(again) != string(data) {
		t.Error("the saved file is not in canonical form")
	}
}

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
// exec, so it errs high). Every command runs three times: as the file
// says, with a budget, and with a budget and checkpointing. It takes about
// a minute and a half on two cores, so it runs when STACKFIT_RSS=1 is set,
// as .ci/run does.
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
	commands := [][]string{
		{"check", file},
		{"report", file},
		{"report", "--format", "markdown", file},
		{"report", "--format", "csv", file},
		{"report", "--format", "json", file},
		{"report", "--format", "json", "-o", filepath.Join(dir, "million.json"), file},
		{"export", file},
		{"export", "-o", filepath.Join(dir, "million.py"), file},
	}
	// Each again with a budget (the fit solver's width search re-evaluates
	// the whole stack), and with a budget and checkpointing (the step
	// simulation's segment bookkeeping).
	var runs [][]string
	for _, training := range [][]string{nil, {"--budget", "24GiB"}, {"--budget", "24GiB", "--checkpoint", "4"}} {
		for _, c := range commands {
			runs = append(runs, append(append([]string{}, c...), training...))
		}
	}
	for _, args := range runs {
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
		t.Logf("%-80s peak RSS %4d MB, %4d MB to stdout", label, rss/1_000_000, info.Size()/1_000_000)
		if rss > limit {
			t.Errorf("%v: peak RSS %d MB, over the %d MB bound", args, rss/1_000_000, limit/1_000_000)
		}
	}
}
