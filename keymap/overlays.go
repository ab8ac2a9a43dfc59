package keymap

import "github.com/charmbracelet/bubbles/key"

// The overlays of the editor (form, picker, prompt, question, help) each
// take the part of the key map they answer to. Each part is built from
// the one KeyMap, so a keys file that rebinds "accept" rebinds it in every
// overlay, and each implements bubbles' help.KeyMap, so its help line is
// generated from the bindings it really uses.

// FormKeys are the keys of a form of fields.
type FormKeys struct {
	Next, Prev, Accept, Cancel key.Binding
}

// ShortHelp is the form's help line.
func (k FormKeys) ShortHelp() []key.Binding { return []key.Binding{k.Next, k.Prev, k.Accept, k.Cancel} }

// FullHelp is the same, as one column.
func (k FormKeys) FullHelp() [][]key.Binding { return [][]key.Binding{k.ShortHelp()} }

// Form returns the form's keys.
func (k KeyMap) Form() FormKeys {
	return FormKeys{Next: k.Next, Prev: k.Prev, Accept: k.Accept, Cancel: k.Cancel}
}

// PickerKeys are the keys of a list to choose from.
type PickerKeys struct {
	Up, Down, PageUp, PageDown, Accept, Cancel key.Binding
}

// ShortHelp is the picker's help line.
func (k PickerKeys) ShortHelp() []key.Binding {
	return []key.Binding{k.Up, k.Down, k.Accept, k.Cancel}
}

// FullHelp adds paging.
func (k PickerKeys) FullHelp() [][]key.Binding {
	return [][]key.Binding{{k.Up, k.Down, k.PageUp, k.PageDown}, {k.Accept, k.Cancel}}
}

// Picker returns the picker's keys.
func (k KeyMap) Picker() PickerKeys {
	return PickerKeys{Up: k.Up, Down: k.Down, PageUp: k.PageUp, PageDown: k.PageDown, Accept: k.Accept, Cancel: k.Cancel}
}

// PromptKeys are the keys of a one-line prompt.
type PromptKeys struct {
	Complete, Accept, Cancel key.Binding
}

// ShortHelp is the prompt's help line.
func (k PromptKeys) ShortHelp() []key.Binding { return []key.Binding{k.Complete, k.Accept, k.Cancel} }

// FullHelp is the same, as one column.
func (k PromptKeys) FullHelp() [][]key.Binding { return [][]key.Binding{k.ShortHelp()} }

// Prompt returns the prompt's keys.
func (k KeyMap) Prompt() PromptKeys {
	return PromptKeys{Complete: k.Complete, Accept: k.Accept, Cancel: k.Cancel}
}

// ConfirmKeys are the answers to a question.
type ConfirmKeys struct {
	Yes, No, Reload, Cancel key.Binding
}

// ShortHelp is the question's help line; Reload is shown only where a
// question offers it (the caller disables it otherwise).
func (k ConfirmKeys) ShortHelp() []key.Binding {
	return []key.Binding{k.Yes, k.No, k.Reload, k.Cancel}
}

// FullHelp is the same, as one column.
func (k ConfirmKeys) FullHelp() [][]key.Binding { return [][]key.Binding{k.ShortHelp()} }

// Confirm returns the question's keys.
func (k KeyMap) Confirm() ConfirmKeys {
	return ConfirmKeys{Yes: k.Yes, No: k.No, Reload: k.Reload, Cancel: k.Cancel}
}

// HelpKeys scroll and close the help screen.
type HelpKeys struct {
	Up, Down, PageUp, PageDown, Top, Bottom, Close, Cancel key.Binding
}

// ShortHelp is the help screen's own help line.
func (k HelpKeys) ShortHelp() []key.Binding {
	return []key.Binding{k.Up, k.Down, k.PageDown, k.Close}
}

// FullHelp is the same, as columns.
func (k HelpKeys) FullHelp() [][]key.Binding {
	return [][]key.Binding{{k.Up, k.Down, k.PageUp, k.PageDown, k.Top, k.Bottom}, {k.Close, k.Cancel}}
}

// Help returns the help screen's keys.
func (k KeyMap) Help() HelpKeys {
	return HelpKeys{Up: k.Up, Down: k.Down, PageUp: k.PageUp, PageDown: k.PageDown, Top: k.Top, Bottom: k.Bottom,
		Close: k.ShowHelp, Cancel: k.Cancel}
}

// FitMapKeys move over the map of what fits, apply a cell or close it.
type FitMapKeys struct {
	Up, Down, Left, Right, Accept, Close, Cancel key.Binding
}

// ShortHelp is the map's help line.
func (k FitMapKeys) ShortHelp() []key.Binding {
	return []key.Binding{k.Up, k.Down, k.Left, k.Right, k.Accept, k.Cancel}
}

// FullHelp adds the key that closes it too.
func (k FitMapKeys) FullHelp() [][]key.Binding {
	return [][]key.Binding{{k.Up, k.Down, k.Left, k.Right}, {k.Accept, k.Close, k.Cancel}}
}

// FitMap returns the map's keys.
func (k KeyMap) FitMap() FitMapKeys {
	return FitMapKeys{Up: k.Up, Down: k.Down, Left: k.Left, Right: k.Right, Accept: k.Accept, Close: k.MapView, Cancel: k.Cancel}
}
