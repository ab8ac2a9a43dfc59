package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"stackfit/engine/examples"
	"stackfit/engine/stackfile"
)

// TestRealTerminal builds the binary, runs the editor in tmux, inserts a
// stage, widens a layer, undoes the widen and saves; it then reads the
// screen with capture-pane and the saved YAML, and checks both.
func TestRealTerminal(t *testing.T) {
	tmux, err := exec.LookPath("tmux")
	if err != nil {
		t.Skip("tmux is not installed (apt-get install tmux); .ci/run installs it")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "stackfit")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("build: %v\n%s", err, out)
	}
	file := filepath.Join(dir, "grader.yaml")
	if err := os.WriteFile(file, examples.FruitGrader(), 0o644); err != nil {
		t.Fatal(err)
	}
	session := "stackfit-test-" + strings.ReplaceAll(filepath.Base(dir), ".", "")
	sock := filepath.Join(dir, "tmux.sock")
	run := func(args ...string) string {
		out, err := exec.Command(tmux, append([]string{"-S", sock}, args...)...).CombinedOutput()
		if err != nil {
			t.Fatalf("tmux %v: %v\n%s", args, err, out)
		}
		return string(out)
	}
	run("new-session", "-d", "-s", session, "-x", "100", "-y", "30",
		"env", "STACKFIT_KEYS="+filepath.Join(dir, "none.yaml"), "TERM=xterm-256color", bin, file)
	defer exec.Command(tmux, "-S", sock, "kill-server").Run()
	screen := func() string { return run("capture-pane", "-p", "-t", session) }
	waitFor := func(text string) string {
		t.Helper()
		deadline := time.Now().Add(10 * time.Second)
		for {
			s := screen()
			if strings.Contains(s, text) {
				return s
			}
			if time.Now().After(deadline) {
				t.Fatalf("screen never showed %q:\n%s", text, s)
			}
			time.Sleep(50 * time.Millisecond)
		}
	}
	keys := func(k ...string) {
		for _, key := range k {
			run("send-keys", "-t", session, key)
			time.Sleep(30 * time.Millisecond)
		}
	}
	waitFor("Fruit grader")
	keys("j", "j", "n")
	waitFor("added a stage")
	keys("k", "k", ">")
	waitFor("widened conv 64")
	keys("u")
	waitFor("undid: widened")
	keys("w")
	s := waitFor("saved grader.yaml")
	for _, want := range []string{"36 layers", "conv 64 k3 s2 p1 nobias", "fits · memory"} {
		if !strings.Contains(s, want) {
			t.Errorf("screen lacks %q:\n%s", want, s)
		}
	}
	keys("q")
	saved, err := stackfile.LoadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if len(saved.Layers) != 36 {
		t.Errorf("saved %d layers, want 36", len(saved.Layers))
	}
	// The stage: stride-2 convolution to 64 channels, then two more at 64;
	// the undone widen left them at 64.
	if l := saved.Layers[3]; l.Filters != 64 || l.Stride.H != 2 {
		t.Errorf("stage entry %+v", l)
	}
	if saved.Layers[9].Filters != 64 {
		t.Errorf("layer 10 has %d filters; the widen was undone", saved.Layers[9].Filters)
	}
	// The file is in canonical form and reloads identically.
	data, _ := os.ReadFile(file)
	again, _ := stackfile.Save(saved)
	if string(again) != string(data) {
		t.Error("the saved file is not in canonical form")
	}
}
