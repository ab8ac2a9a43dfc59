package store

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestFolds checks the fold-state file: what is saved loads back; a
// missing file is no state; a file that is too large, of another stack
// file, not one at all, or holding odd lines is refused or trimmed with a
// message, never trusted (common practice for state files a user or a
// program may have damaged).
func TestFolds(t *testing.T) {
	dir := t.TempDir()
	f := FoldsFor(filepath.Join(dir, "net.yaml"), dir)
	if FoldsFor("", dir) != nil || FoldsFor("x.yaml", "") != nil {
		t.Error("an untitled stack or no state folder has a fold state")
	}
	if a, b, err := f.Load(); a != nil || b != nil || err != nil {
		t.Errorf("missing file: %v %v %v", a, b, err)
	}
	if err := f.Save([]string{"1", "2/0", "bad key", "../x"}, []string{"1/r2"}); err != nil {
		t.Fatal(err)
	}
	folded, opened, err := f.Load()
	if err != nil || strings.Join(folded, " ") != "1 2/0" || strings.Join(opened, " ") != "1/r2" {
		t.Errorf("round trip: %v %v %v", folded, opened, err)
	}
	head := foldsHeader + "\n# for: \"" + f.For + "\"\n"
	tests := []struct {
		name, content string
		folded        string
		msg           string
	}{
		{"odd lines skipped", head + "fold 3\nfold 3/x\nopen\nshut 4\nfold " + strings.Repeat("1", 200) + "\n", "3", "skipped 4 unreadable line(s)"},
		{"another file's", foldsHeader + "\n# for: \"/elsewhere.yaml\"\nfold 1\n", "", "belongs to another file"},
		{"not a fold-state file", "fold 1\n", "", "is not a fold-state file"},
		{"too large", head + strings.Repeat("fold 1\n", 20000), "", "is over 64 KiB"},
		{"binary", head + "\x00\x1b]0;x\afold 1\n", "", "skipped 1"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if err := os.WriteFile(f.Path, []byte(tt.content), 0o600); err != nil {
				t.Fatal(err)
			}
			folded, _, err := f.Load()
			if strings.Join(folded, " ") != tt.folded {
				t.Errorf("folded %v, want %q", folded, tt.folded)
			}
			if err == nil || !strings.Contains(err.Error(), tt.msg) {
				t.Errorf("error %v, want one saying %q", err, tt.msg)
			}
		})
	}
	if err := f.Save(nil, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(f.Path); !os.IsNotExist(err) {
		t.Errorf("saving nothing left the file: %v", err)
	}
	os.MkdirAll(f.Path, 0o755) // a folder where the file should be
	if _, _, err := f.Load(); err == nil {
		t.Error("a folder read as a fold state")
	}
}
