package store

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// Folds keeps which items of one stack file the editor shows folded, from
// one run to the next. It lives in the state folder, never in the stack
// file: a file named after a hash of the stack file's absolute path,
// holding one line per folded item ("fold 0/2") or opened later repeat
// of a block ("open 0/2/r3"), keys the editor gives.
type Folds struct {
	Path string // the fold-state file
	For  string // the stack file it belongs to
}

// Limits on a fold-state file: what the editor writes stays far below
// them; a larger or stranger file is someone else's, and is not trusted.
const (
	maxFoldBytes = 64 << 10
	maxFoldKeys  = 4096
	maxFoldKey   = 96
)

const foldsHeader = "# stackfit fold state: which blocks the editor shows folded; safe to delete"

// FoldsFor returns the fold state of the stack file at path, kept in
// stateDir; nil for an untitled stack or when there is no state folder.
func FoldsFor(path, stateDir string) *Folds {
	if path == "" || stateDir == "" {
		return nil
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		abs = path
	}
	h := sha256.Sum256([]byte(abs))
	return &Folds{Path: filepath.Join(stateDir, "folds", hex.EncodeToString(h[:12])), For: abs}
}

// Load reads the folded and opened keys. A missing file is no state and
// no error. A file that is too large, not a regular file or of another
// stack file gives nothing; unreadable lines are skipped. Either way the
// error says what was wrong, and the keys read are still good to use.
func (f *Folds) Load() (folded, opened []string, err error) {
	if f == nil {
		return nil, nil, nil
	}
	file, err := openRegular(f.Path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil, nil
	}
	if err != nil {
		return nil, nil, fmt.Errorf("fold state not restored: %w", err)
	}
	defer file.Close()
	data, err := readLimited(file, maxFoldBytes)
	if err != nil {
		return nil, nil, fmt.Errorf("fold state not restored: %s is over %d KiB", f.Path, maxFoldBytes>>10)
	}
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(make([]byte, 0, 4096), maxFoldBytes)
	line, bad := 0, 0
	for sc.Scan() {
		line++
		t := sc.Text()
		switch {
		case line == 1 && t != foldsHeader:
			return nil, nil, fmt.Errorf("fold state not restored: %s is not a fold-state file", f.Path)
		case line == 1:
		case line == 2:
			if t != "# for: "+strconv.Quote(f.For) {
				return nil, nil, fmt.Errorf("fold state not restored: %s belongs to another file", f.Path)
			}
		default:
			what, k, ok := strings.Cut(t, " ")
			if !ok || !validFoldKey(k) || len(folded)+len(opened) >= maxFoldKeys {
				bad++
				continue
			}
			switch what {
			case "fold":
				folded = append(folded, k)
			case "open":
				opened = append(opened, k)
			default:
				bad++
			}
		}
	}
	if bad > 0 {
		return folded, opened, fmt.Errorf("fold state: skipped %d unreadable line(s) of %s", bad, f.Path)
	}
	return folded, opened, nil
}

// validFoldKey accepts the editor's keys: numbers joined by '/', the last
// one possibly "r" and a number.
func validFoldKey(k string) bool {
	if k == "" || len(k) > maxFoldKey {
		return false
	}
	parts := strings.Split(k, "/")
	for i, p := range parts {
		if i == len(parts)-1 && i > 0 {
			p = strings.TrimPrefix(p, "r")
		}
		if p == "" {
			return false
		}
		for _, c := range p {
			if c < '0' || c > '9' {
				return false
			}
		}
	}
	return true
}

// Save records the folded and opened keys, replacing the file atomically;
// with none, it removes the file. Invalid keys are left out.
func (f *Folds) Save(folded, opened []string) error {
	if f == nil {
		return nil
	}
	var b bytes.Buffer
	n := 0
	for _, set := range []struct {
		what string
		keys []string
	}{{"fold", folded}, {"open", opened}} {
		for _, k := range set.keys {
			if validFoldKey(k) && n < maxFoldKeys {
				fmt.Fprintf(&b, "%s %s\n", set.what, k)
				n++
			}
		}
	}
	if n == 0 {
		if err := os.Remove(f.Path); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return err
		}
		return nil
	}
	if err := os.MkdirAll(filepath.Dir(f.Path), 0o755); err != nil {
		return err
	}
	data := append([]byte(foldsHeader+"\n# for: "+strconv.Quote(f.For)+"\n"), b.Bytes()...)
	return WriteFileAtomic(f.Path, data, 0o600)
}
