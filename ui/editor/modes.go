package editor

import "stackfit/keymap"

// The editor's modes are the key map's modes.
const (
	modeNormal  = keymap.Normal
	modeForm    = keymap.Form
	modePicker  = keymap.Picker
	modePrompt  = keymap.Prompt
	modeConfirm = keymap.Confirm
	modeChart   = keymap.Chart
	modeHelp    = keymap.Help
)
