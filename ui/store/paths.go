package store

import (
	"path/filepath"

	"stackfit/keymap"
)

// Paths are the places outside stack files that stackfit reads or writes.
type Paths struct {
	// Keys is the keys file: $STACKFIT_KEYS, else
	// $XDG_CONFIG_HOME/stackfit/keys.yaml, else
	// ~/.config/stackfit/keys.yaml; "" when none of them is known.
	Keys string
	// State is where untitled stacks are journaled:
	// $XDG_STATE_HOME/stackfit, else ~/.local/state/stackfit, else
	// stackfit in the temporary folder.
	State string
}

// Locate works out Paths from getenv (an environment variable's value, ""
// when unset), the home folder (home, "" when unknown) and the temporary
// folder. It reads nothing itself: the command line passes the process's
// environment once, at start.
func Locate(getenv func(string) string, home, tempDir string) Paths {
	var p Paths
	switch {
	case getenv(keymap.EnvPath) != "":
		p.Keys = getenv(keymap.EnvPath)
	case getenv("XDG_CONFIG_HOME") != "":
		p.Keys = filepath.Join(getenv("XDG_CONFIG_HOME"), "stackfit", "keys.yaml")
	case home != "":
		p.Keys = filepath.Join(home, ".config", "stackfit", "keys.yaml")
	}
	switch {
	case getenv("XDG_STATE_HOME") != "":
		p.State = filepath.Join(getenv("XDG_STATE_HOME"), "stackfit")
	case home != "":
		p.State = filepath.Join(home, ".local", "state", "stackfit")
	default:
		p.State = filepath.Join(tempDir, "stackfit")
	}
	return p
}
