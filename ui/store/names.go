package store

import (
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// maxNames bounds the completions listed for one prefix.
const maxNames = 200

// Names completes a file name for the editor's open and save prompts: the
// folders and the .yaml or .yml files whose path starts with prefix,
// folders ending in "/", sorted, at most 200. Hidden files (such as
// recovery files) are left out unless the prefix names them.
func (Disk) Names(prefix string) []string {
	dir, base := filepath.Split(prefix)
	read := dir
	if read == "" {
		read = "."
	}
	entries, err := os.ReadDir(read)
	if err != nil {
		return nil
	}
	var out []string
	for _, e := range entries {
		name := e.Name()
		if !strings.HasPrefix(name, base) || strings.HasPrefix(name, ".") && !strings.HasPrefix(base, ".") {
			continue
		}
		isDir := e.IsDir()
		if e.Type()&os.ModeSymlink != 0 {
			if info, err := os.Stat(filepath.Join(read, name)); err == nil {
				isDir = info.IsDir()
			}
		}
		switch {
		case isDir:
			out = append(out, dir+name+"/")
		case strings.HasSuffix(name, ".yaml") || strings.HasSuffix(name, ".yml"):
			out = append(out, dir+name)
		}
		if len(out) >= maxNames {
			break
		}
	}
	sort.Strings(out)
	return out
}
