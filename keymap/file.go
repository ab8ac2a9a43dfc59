package keymap

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"slices"
	"sort"
	"strings"
	"syscall"

	"github.com/charmbracelet/bubbles/key"
	"gopkg.in/yaml.v3"

	"stackfit/engine"
	"stackfit/engine/textsafe"
)

// ErrKeys is wrapped by every error about a keys file.
var ErrKeys = errors.New("bad keys file")

// EnvPath names the environment variable that points at a keys file; the
// command line reads it (ui/store.Locate works out the keys file's path).
const EnvPath = "STACKFIT_KEYS"

// MaxFileBytes is the largest keys file read (64 KiB; a keys file that
// rebinds every action is a few kilobytes).
const MaxFileBytes = 64 << 10

// LoadFile reads overrides from path into a copy of base. A missing file is
// no error (base comes back unchanged). Anything but a regular file (a
// named pipe, a device such as /dev/zero, a socket, a folder) is refused
// without reading it, and so is a file over MaxFileBytes.
func LoadFile(path string, base KeyMap) (KeyMap, error) {
	if path == "" {
		return base, nil
	}
	data, err := readKeysFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return base, nil
	}
	if err != nil {
		return base, err
	}
	km, err := Parse(data, base)
	if err != nil {
		return base, fmt.Errorf("%s: %w", path, err)
	}
	return km, nil
}

// readKeysFile reads the keys file at path: a regular file (checked before
// it is opened, and again once opened without waiting, O_NONBLOCK) of at
// most MaxFileBytes. A missing file gives os.ErrNotExist.
func readKeysFile(path string) ([]byte, error) {
	fail := func(err error) ([]byte, error) {
		return nil, fmt.Errorf("%w: %s: %v", ErrKeys, path, err)
	}
	fi, err := os.Stat(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
	if err != nil {
		return fail(err)
	}
	if err := keysRegular(path, fi.Mode()); err != nil {
		return nil, err
	}
	f, err := os.OpenFile(path, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		return fail(err)
	}
	defer f.Close()
	if fi, err = f.Stat(); err != nil {
		return fail(err)
	}
	if err := keysRegular(path, fi.Mode()); err != nil {
		return nil, err
	}
	data, err := io.ReadAll(io.LimitReader(f, MaxFileBytes+1))
	if err != nil {
		return fail(err)
	}
	if len(data) > MaxFileBytes {
		return nil, fmt.Errorf("%w: %s is over %d bytes (64 KiB); a keys file is a few lines of action: keys", ErrKeys, path, MaxFileBytes)
	}
	return data, nil
}

// keysRegular refuses a keys path that is not a regular file.
func keysRegular(path string, m fs.FileMode) error {
	if m.IsRegular() {
		return nil
	}
	what := "a special file"
	switch {
	case m&fs.ModeDir != 0:
		what = "a folder"
	case m&fs.ModeNamedPipe != 0:
		what = "a named pipe"
	case m&fs.ModeSocket != 0:
		what = "a socket"
	case m&(fs.ModeDevice|fs.ModeCharDevice) != 0:
		what = "a device"
	}
	return fmt.Errorf("%w: %s is %s, not a keys file; make it a YAML file of action: keys lines, or point %s at one", ErrKeys, path, what, EnvPath)
}

// Parse applies a keys file: a YAML mapping from action name to a key or a
// list of keys, e.g.
//
//	add: i
//	delete: [x, d]
//	undo: []        # no key: the action is disabled
//
// Unknown action names and keys that two actions of one mode would share
// are errors that name them, and so are a file that disables quit,
// force-quit or save (no way out, or no way to keep the work) and one that
// gives AlwaysQuit (ctrl+c) to another action: ctrl+c always quits. Key
// labels are escaped (textsafe.Line) as they are read.
func Parse(data []byte, base KeyMap) (KeyMap, error) {
	km := base
	var raw map[string]yaml.Node
	if err := yaml.Unmarshal(data, &raw); err != nil {
		return base, fmt.Errorf("%w: not a YAML mapping of action: keys (%v)", ErrKeys, err)
	}
	acts := km.Actions()
	byName := map[string]*key.Binding{}
	var all []string
	for _, a := range acts {
		byName[a.Name] = a.Binding
		all = append(all, a.Name)
	}
	names := make([]string, 0, len(raw))
	for n := range raw {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, name := range names {
		b, ok := byName[name]
		if !ok {
			if hint := engine.Suggest(name, all); hint != "" {
				return base, fmt.Errorf("%w: unknown action %q; did you mean %q? (actions: %s)", ErrKeys, name, hint, strings.Join(all, ", "))
			}
			return base, fmt.Errorf("%w: unknown action %q; actions: %s", ErrKeys, name, strings.Join(all, ", "))
		}
		node := raw[name]
		var keys []string
		switch node.Kind {
		case yaml.ScalarNode:
			keys = []string{node.Value}
		case yaml.SequenceNode:
			if err := node.Decode(&keys); err != nil {
				return base, fmt.Errorf("%w: %s: give a key or a list of keys", ErrKeys, name)
			}
		default:
			return base, fmt.Errorf("%w: %s: give a key or a list of keys", ErrKeys, name)
		}
		for _, k := range keys {
			if strings.TrimSpace(k) == "" {
				return base, fmt.Errorf("%w: %s: empty key", ErrKeys, name)
			}
			if k == AlwaysQuit && name != "force-quit" {
				return base, fmt.Errorf("%w: %s: %s always quits and cannot be bound to another action; give %s another key", ErrKeys, name, AlwaysQuit, name)
			}
		}
		if len(keys) == 0 {
			if why := needed(name); why != "" {
				return base, fmt.Errorf("%w: %s: [] would leave no key to %s; give %s a key", ErrKeys, name, why, name)
			}
			b.SetEnabled(false)
			continue
		}
		if name == "force-quit" && !slices.Contains(keys, AlwaysQuit) {
			keys = append(keys, AlwaysQuit) // ctrl+c quits whatever the file says
		}
		help := b.Help()
		// The label is what the help line shows: escaped here, once, so
		// no key name from the file reaches the terminal raw.
		*b = key.NewBinding(key.WithKeys(keys...), key.WithHelp(textsafe.Line(strings.Join(keys, "/")), help.Desc))
	}
	if err := km.Check(); err != nil {
		return base, err
	}
	return km, nil
}

// AlwaysQuit is the key that quits in every mode whatever a keys file
// says: a keys file cannot take it from force-quit nor give it to another
// action.
const AlwaysQuit = "ctrl+c"

// needed says what an action that a keys file may rebind but not disable
// is for ("" for any other action): without quit, force-quit and save the
// editor could not be left, nor the work kept.
func needed(action string) string {
	switch action {
	case "quit":
		return "leave the editor"
	case "force-quit":
		return "leave the editor from any screen"
	case "save":
		return "save your work"
	}
	return ""
}

// Check reports two enabled bindings of one mode that share a key.
func (k *KeyMap) Check() error {
	for m := Mode(0); m < modeCount; m++ {
		owner := map[string]string{}
		for _, a := range k.Actions() {
			if !a.Binding.Enabled() || !hasMode(a.Modes, m) {
				continue
			}
			for _, key := range a.Binding.Keys() {
				if prev, ok := owner[key]; ok {
					return fmt.Errorf("%w: key %q is bound to both %q and %q in %s mode; give one of them another key", ErrKeys, key, prev, a.Name, m)
				}
				owner[key] = a.Name
			}
		}
	}
	return nil
}

func hasMode(ms []Mode, m Mode) bool {
	for _, x := range ms {
		if x == m {
			return true
		}
	}
	return false
}
