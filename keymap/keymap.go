// Package keymap holds every key binding of stackfit's editor: one KeyMap
// built by DefaultKeyMap, help generated from it, and user overrides read
// from a YAML keys file.
package keymap

import (
	"github.com/charmbracelet/bubbles/key"
)

// Mode is a state of the editor in which a set of bindings is active.
type Mode uint8

// Modes.
const (
	Normal  Mode = iota // moving through and editing the stack
	Form                // editing a layer's fields or the training settings
	Picker              // choosing a layer kind
	Prompt              // typing a line (quick entry, a path, a factor)
	Confirm             // answering a yes/no question
	Chart               // the depth chart
	Help                // the help screen
	FitMap              // the map of the largest batch over widths and input sizes
	modeCount
)

var modeNames = [...]string{"normal", "form", "picker", "prompt", "confirm", "chart", "help", "map"}

// String names the mode.
func (m Mode) String() string {
	if int(m) < len(modeNames) {
		return modeNames[m]
	}
	return "invalid"
}

// KeyMap is every binding of the editor.
type KeyMap struct {
	// Moving.
	Up, Down, PageUp, PageDown, Top, Bottom, Fold key.Binding
	// Editing the stack.
	Edit, Add, QuickAdd, Copy, Delete, MoveUp, MoveDown, Select, Wrap key.Binding
	Widen, Narrow, Width, Stage, UpStage, Undo, Redo                  key.Binding
	// Panels and files.
	Settings, ChartView, Baseline, ShowHelp, Save, SaveAs, Open, Quit, ForceQuit key.Binding
	// Forms, pickers and prompts.
	Next, Prev, Accept, Cancel, Complete key.Binding
	// Questions.
	Yes, No key.Binding
	// Reload reads a file again (offered when it changed on disk).
	Reload key.Binding
	// Folding everything, jumping between problems, scrolling the details.
	FoldAll, UnfoldAll, NextProblem, PrevProblem, DetailsDown, DetailsUp key.Binding
	// The map of what fits: opening it, and moving across it.
	MapView, Left, Right key.Binding
	// ShareView switches the side column's share bar between activation
	// memory and the estimated time (with a GPU model set).
	ShareView key.Binding
}

// DefaultKeyMap returns the built-in bindings. Arrow keys and vim-style
// letters both move.
func DefaultKeyMap() KeyMap {
	b := func(help string, desc string, keys ...string) key.Binding {
		return key.NewBinding(key.WithKeys(keys...), key.WithHelp(help, desc))
	}
	return KeyMap{
		Up:       b("↑/k", "up", "up", "k"),
		Down:     b("↓/j", "down", "down", "j"),
		PageUp:   b("pgup", "page up", "pgup", "ctrl+u"),
		PageDown: b("pgdn", "page down", "pgdown", "ctrl+d"),
		Top:      b("g/home", "first layer", "home", "g"),
		Bottom:   b("G/end", "last layer", "end", "G"),
		Fold:     b("space", "fold/unfold block", " ", "space"),

		Edit:     b("enter/e", "edit fields", "enter", "e"),
		Add:      b("a", "add layer below", "a"),
		QuickAdd: b(":", "type a layer line", ":"),
		Copy:     b("c", "copy layer/range below", "c"),
		Delete:   b("x", "delete", "x", "delete"),
		MoveUp:   b("K/⇧↑", "move up", "K", "shift+up"),
		MoveDown: b("J/⇧↓", "move down", "J", "shift+down"),
		Select:   b("v", "start/end a range", "v"),
		Wrap:     b("b", "wrap in block", "b"),
		Widen:    b(">", "filters ×2", ">", "."),
		Narrow:   b("<", "filters ÷2", "<", ","),
		Width:    b("*", "width multiplier", "*"),
		Stage:    b("n", "new downsample stage", "n"),
		UpStage:  b("N", "new upsample stage", "N"),
		Undo:     b("u", "undo", "u", "ctrl+z"),
		Redo:     b("U/ctrl+r", "redo", "U", "ctrl+y", "ctrl+r"), // ctrl+r: vi's redo

		Settings:  b("t", "training setup", "t"),
		ChartView: b("p", "depth chart", "p"),
		Baseline:  b("m", "mark/clear baseline", "m"),
		ShowHelp:  b("?", "help", "?"),
		Save:      b("w", "save", "w", "ctrl+s"),
		SaveAs:    b("W", "save as", "W"),
		Open:      b("o", "open file", "o"),
		Quit:      b("q", "quit", "q"),
		ForceQuit: b("ctrl+c", "quit", "ctrl+c"),

		Next:     b("tab/↓", "next field", "tab", "down"),
		Prev:     b("⇧tab/↑", "previous field", "shift+tab", "up"),
		Accept:   b("enter", "accept", "enter"),
		Cancel:   b("esc", "cancel", "esc"),
		Complete: b("tab", "complete kind", "tab"),

		Yes:    b("y", "yes", "y"),
		No:     b("n", "no", "n"),
		Reload: b("r", "reload", "r"),

		FoldAll:     b("-", "fold all", "-"),
		UnfoldAll:   b("+", "unfold all", "+", "="),
		NextProblem: b("f", "next error/warning", "f"),
		PrevProblem: b("F", "previous error/warning", "F"),
		DetailsDown: b("}", "scroll details down", "}"),
		DetailsUp:   b("{", "scroll details up", "{"),

		MapView:   b("M", "what-fits map", "M"),
		ShareView: b("%", "share bar: memory/time", "%"),
		Left:      b("←/h", "left", "left", "h"),
		Right:     b("→/l", "right", "right", "l"),
	}
}

// Action is one named binding and the modes it is active in.
type Action struct {
	Name    string
	Modes   []Mode
	Binding *key.Binding
}

// Actions lists every binding with its name (as used in the keys file)
// and its modes.
func (k *KeyMap) Actions() []Action {
	n := []Mode{Normal}
	nav := []Mode{Normal, Picker, Help, FitMap}
	ends := []Mode{Normal, Help}
	return []Action{
		{"up", nav, &k.Up}, {"down", nav, &k.Down}, {"page-up", nav, &k.PageUp}, {"page-down", nav, &k.PageDown},
		{"top", ends, &k.Top}, {"bottom", ends, &k.Bottom}, {"fold", n, &k.Fold},
		{"edit", n, &k.Edit}, {"add", n, &k.Add}, {"quick-add", n, &k.QuickAdd}, {"copy", n, &k.Copy},
		{"delete", n, &k.Delete}, {"move-up", n, &k.MoveUp}, {"move-down", n, &k.MoveDown},
		{"select", n, &k.Select}, {"wrap", n, &k.Wrap}, {"widen", n, &k.Widen}, {"narrow", n, &k.Narrow},
		{"width", n, &k.Width}, {"stage", n, &k.Stage}, {"up-stage", n, &k.UpStage}, {"undo", n, &k.Undo}, {"redo", n, &k.Redo},
		{"settings", n, &k.Settings}, {"chart", []Mode{Normal, Chart}, &k.ChartView}, {"map", []Mode{Normal, FitMap}, &k.MapView}, {"baseline", n, &k.Baseline},
		{"help", []Mode{Normal, Help}, &k.ShowHelp}, {"save", n, &k.Save}, {"save-as", n, &k.SaveAs},
		{"open", n, &k.Open}, {"quit", n, &k.Quit},
		{"force-quit", []Mode{Normal, Form, Picker, Prompt, Confirm, Chart, Help, FitMap}, &k.ForceQuit},
		{"next", []Mode{Form}, &k.Next}, {"prev", []Mode{Form}, &k.Prev},
		{"accept", []Mode{Form, Picker, Prompt, FitMap}, &k.Accept},
		{"cancel", []Mode{Form, Picker, Prompt, Confirm, Chart, Help, FitMap}, &k.Cancel},
		{"complete", []Mode{Prompt}, &k.Complete},
		{"yes", []Mode{Confirm}, &k.Yes}, {"no", []Mode{Confirm}, &k.No}, {"reload", []Mode{Confirm}, &k.Reload},
		{"fold-all", n, &k.FoldAll}, {"unfold-all", n, &k.UnfoldAll},
		{"next-problem", n, &k.NextProblem}, {"prev-problem", n, &k.PrevProblem},
		{"details-down", n, &k.DetailsDown}, {"details-up", n, &k.DetailsUp},
		{"left", []Mode{FitMap}, &k.Left}, {"right", []Mode{FitMap}, &k.Right},
		{"share", n, &k.ShareView},
	}
}

// ShortHelp is the one-line help of the normal mode.
func (k KeyMap) ShortHelp() []key.Binding {
	return []key.Binding{k.Edit, k.Add, k.QuickAdd, k.Stage, k.Widen, k.Undo, k.Settings, k.Save, k.ShowHelp, k.Quit}
}

// FullHelp is the help screen, in columns.
func (k KeyMap) FullHelp() [][]key.Binding {
	return [][]key.Binding{
		{k.Up, k.Down, k.PageUp, k.PageDown, k.Top, k.Bottom, k.Fold, k.FoldAll, k.UnfoldAll},
		{k.Edit, k.Add, k.QuickAdd, k.Copy, k.Delete, k.MoveUp, k.MoveDown, k.Select, k.Wrap},
		{k.Widen, k.Narrow, k.Width, k.Stage, k.UpStage, k.Undo, k.Redo, k.Baseline},
		{k.Settings, k.ChartView, k.ShowHelp, k.Save, k.SaveAs, k.Open, k.Quit, k.ForceQuit},
		{k.NextProblem, k.PrevProblem, k.DetailsDown, k.DetailsUp, k.MapView, k.ShareView},
	}
}

// FormHelp is the help line of forms.
func (k KeyMap) FormHelp() []key.Binding {
	return []key.Binding{k.Next, k.Prev, k.Accept, k.Cancel}
}

// PickerHelp is the help line of the kind picker.
func (k KeyMap) PickerHelp() []key.Binding {
	return []key.Binding{k.Up, k.Down, k.Accept, k.Cancel}
}

// PromptHelp is the help line of prompts.
func (k KeyMap) PromptHelp() []key.Binding {
	return []key.Binding{k.Complete, k.Accept, k.Cancel}
}

// ConfirmHelp is the help line of questions.
func (k KeyMap) ConfirmHelp() []key.Binding {
	return []key.Binding{k.Yes, k.No, k.Cancel}
}
