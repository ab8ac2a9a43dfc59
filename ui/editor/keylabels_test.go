package editor

import (
	"strings"
	"testing"

	"github.com/charmbracelet/bubbles/key"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine/textsafe"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// evilLabel is xterm's window-title command (OSC 0 ; text BEL), the text a
// keys file's label could carry (from memory of xterm's control sequences).
const evilLabel = "\x1b]0;owned\x07"

// evilKeys is the default key map with every label hostile (the keys stay,
// so the tests can still press them): what a key map built without
// keymap.Parse's escaping would hold.
func evilKeys() keymap.KeyMap {
	km := keymap.DefaultKeyMap()
	for _, a := range km.Actions() {
		h := a.Binding.Help()
		*a.Binding = key.NewBinding(key.WithKeys(a.Binding.Keys()...), key.WithHelp(h.Key+evilLabel, h.Desc+evilLabel))
	}
	return km
}

// TestKeyLabelsShowSafely renders every place a key label reaches the
// screen (the hint line in each mode, the help screen and its foot, the
// form's refusal, the budget hint, the too-small note): no line may hold
// a control character, and the label shows as a visible escape.
func TestKeyLabelsShowSafely(t *testing.T) {
	m := New(Options{Stack: example(t), Keys: evilKeys(), Styles: styles.DefaultStyles(), KeysPath: testKeysPath, Files: store.Disk{}})
	m.Update(tea.WindowSizeMsg{Width: 200, Height: 30})
	screens := map[string]string{"normal": m.View()}
	press(m, "enter")
	screens["form"] = m.View()
	press(m, "ctrl+u")
	typeText(m, "x")
	press(m, "enter") // refused: the notice names the cancel key
	screens["form refused"] = m.View()
	press(m, "esc", "?")
	screens["help"] = m.View()
	press(m, "esc", ":")
	screens["prompt"] = m.View() // its hint line shows no key when empty
	press(m, "esc")
	m.Update(tea.WindowSizeMsg{Width: 20, Height: 5})
	screens["too small"] = m.View()
	for name, v := range screens {
		for i, line := range strings.Split(v, "\n") {
			if !textsafe.Safe(line) {
				t.Errorf("%s: line %d holds a control character: %q", name, i+1, line)
			}
		}
		if name != "prompt" && !strings.Contains(v, `\x1b]0;owned\a`) {
			t.Errorf("%s: the label does not show as an escape:\n%s", name, v)
		}
	}
}

// TestCtrlCAlwaysQuits: ctrl+c quits from the stack view and from a form
// even when the key map's force-quit lacks it (common practice: ctrl+c
// ends a terminal program).
func TestCtrlCAlwaysQuits(t *testing.T) {
	for _, at := range []string{"normal", "form"} {
		km := keymap.DefaultKeyMap()
		km.ForceQuit = key.NewBinding(key.WithKeys("ctrl+q"), key.WithHelp("ctrl+q", "quit"))
		m := New(Options{Stack: example(t), Keys: km, Styles: styles.DefaultStyles(), KeysPath: testKeysPath, Files: store.Disk{}})
		m.Update(tea.WindowSizeMsg{Width: 100, Height: 30})
		if at == "form" {
			press(m, "enter")
		}
		press(m, "ctrl+c")
		if !m.quitting {
			t.Errorf("%s: ctrl+c did not quit", at)
		}
	}
}
