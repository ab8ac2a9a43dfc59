package editor

import (
	"os"
	"strings"
	"testing"

	"github.com/charmbracelet/x/ansi"

	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"

	tea "github.com/charmbracelet/bubbletea"
)

// readmeScreen draws the screen the README shows: the built-in fruit
// grader opened as grader.yaml at 80×24, without colour, the cursor on its
// second stride-2 convolution, the background width search's answer in.
func readmeScreen(t *testing.T) string {
	m := New(Options{Stack: example(t), Path: "grader.yaml", Keys: keymap.DefaultKeyMap(), Styles: styles.DefaultStyles(), KeysPath: testKeysPath, Files: store.Disk{}})
	m.Update(tea.WindowSizeMsg{Width: 80, Height: 24})
	press(m, "j", "j", "j", "j", "j", "j")
	m.nums.fit.MaxWidth, m.nums.fit.WidthExact = 23.62, true // the background search's answer for this stack
	m.nums.widthState = widthDone
	var lines []string
	for _, l := range strings.Split(ansi.Strip(m.View()), "\n") {
		lines = append(lines, strings.TrimRight(l, " "))
	}
	return strings.TrimRight(strings.Join(lines, "\n"), "\n")
}

// TestReadmeScreen keeps the README's picture of the editor the editor's
// own: the fenced block under "## The editor" must be what the editor
// draws (trailing spaces aside). When the screen changes on purpose, run
// with STACKFIT_UPDATE_README=1 to write the new picture into the README.
func TestReadmeScreen(t *testing.T) {
	const path = "../../README.md"
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	readme := string(data)
	head := strings.Index(readme, "## The editor\n\n```\n")
	if head < 0 {
		t.Fatal(`README.md has no "## The editor" section starting with a fenced block`)
	}
	start := head + len("## The editor\n\n```\n")
	end := strings.Index(readme[start:], "\n```\n")
	if end < 0 {
		t.Fatal("the README's editor picture has no closing fence")
	}
	got, want := readme[start:start+end], readmeScreen(t)
	if got == want {
		return
	}
	if os.Getenv("STACKFIT_UPDATE_README") == "1" {
		if err := os.WriteFile(path, []byte(readme[:start]+want+readme[start+end:]), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("README.md's editor picture updated")
		return
	}
	t.Errorf("the README's editor picture is not what the editor draws; run with STACKFIT_UPDATE_README=1 to update it. The editor draws:\n%s", want)
}
