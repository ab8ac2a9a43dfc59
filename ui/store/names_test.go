package store

import (
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// TestNames checks file-name completion: stack files and folders that
// start with the prefix, folders marked with "/", hidden files and other
// files left out.
func TestNames(t *testing.T) {
	dir := t.TempDir()
	for _, f := range []string{"net.yaml", "net-small.yml", "notes.txt", ".net.yaml.unsaved.12", "other.yaml"} {
		os.WriteFile(filepath.Join(dir, f), []byte("x"), 0o644)
	}
	os.Mkdir(filepath.Join(dir, "nets"), 0o755)
	tests := []struct {
		prefix string
		want   []string
	}{
		{dir + "/ne", []string{dir + "/net-small.yml", dir + "/net.yaml", dir + "/nets/"}},
		{dir + "/o", []string{dir + "/other.yaml"}},
		{dir + "/.n", []string{}},
		{dir + "/zz", []string{}},
		{filepath.Join(dir, "missing") + "/x", []string{}},
	}
	for _, tt := range tests {
		got := Disk{}.Names(tt.prefix)
		if len(got) == 0 && len(tt.want) == 0 {
			continue
		}
		if !slices.Equal(got, tt.want) {
			t.Errorf("Names(%q) = %v, want %v", tt.prefix, got, tt.want)
		}
	}
}
