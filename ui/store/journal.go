package store

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"time"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// Journal keeps one editing session's unsaved state beside its file, so
// that a crash or a killed terminal loses no edit. Each session has its
// own recovery file, ".NAME.unsaved.PID", so that two editors on one file
// never delete or offer each other's edits. It records the file it
// belongs to, that file's hash as the session last read or wrote it, and
// ends in a marker with the length and checksum of what it holds, so that
// a file cut short is known for what it is.
type Journal struct {
	Path string // this session's recovery file
	For  string // the stack file it guards ("" when untitled)
	base string // sha256 of the file's content as last read or written
	lock *os.File
}

// Hold marks the session as live for as long as the process runs: it
// takes an exclusive lock on PATH.lock, which other sessions test (a lock
// dies with its process, so neither a crash nor a reused process id
// fools them).
func (j *Journal) Hold() error {
	if j.lock != nil {
		return nil
	}
	if err := os.MkdirAll(filepath.Dir(j.Path), 0o755); err != nil {
		return err
	}
	f, err := os.OpenFile(j.Path+lockSuffix, os.O_CREATE|os.O_RDWR, 0o600)
	if err != nil {
		return err
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		return err
	}
	j.lock = f
	return nil
}

const lockSuffix = ".lock"

// locked reports whether some live session holds the lock file p.
func locked(p string) bool {
	f, err := os.OpenFile(p, os.O_RDWR, 0)
	if err != nil {
		return false
	}
	defer f.Close()
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		return true
	}
	syscall.Flock(int(f.Fd()), syscall.LOCK_UN)
	return false
}

const journalSuffix = ".unsaved"

// JournalFor returns this session's journal for the stack file path: a
// hidden file beside it. An untitled stack (path "") is journaled in
// stateDir (Paths.State).
func JournalFor(path, stateDir string) *Journal {
	pid := strconv.Itoa(os.Getpid())
	if path == "" {
		return &Journal{Path: filepath.Join(stateDir, "untitled"+journalSuffix+"."+pid)}
	}
	return &Journal{Path: journalPrefix(path) + "." + pid, For: path}
}

// journalPrefix is the name every session's journal of path starts with.
func journalPrefix(path string) string {
	return filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+journalSuffix)
}

// Rebase records the file's content as the session now knows it (after a
// load or a save; nil for a file not on disk).
func (j *Journal) Rebase(data []byte) { j.base = hashOf(data) }

func hashOf(data []byte) string {
	if data == nil {
		return "none"
	}
	h := sha256.Sum256(data)
	return hex.EncodeToString(h[:])
}

// Record writes s to the journal, atomically.
func (j *Journal) Record(s *engine.Stack) error {
	body, err := stackfile.Save(s)
	if err != nil {
		return err
	}
	base := j.base
	if base == "" {
		base = "none"
	}
	var b bytes.Buffer
	fmt.Fprintf(&b, "# stackfit recovery file: unsaved edits; stackfit offers them the next time the file is opened\n")
	fmt.Fprintf(&b, "# for: %s\n", strconv.Quote(j.For))
	fmt.Fprintf(&b, "# pid: %d\n", os.Getpid())
	fmt.Fprintf(&b, "# file-sha256: %s\n", base)
	b.Write(body)
	sum := sha256.Sum256(body)
	fmt.Fprintf(&b, "# complete: %d %s\n", len(body), hex.EncodeToString(sum[:]))
	if err := os.MkdirAll(filepath.Dir(j.Path), 0o755); err != nil {
		return fmt.Errorf("recovery file: %w", err)
	}
	return WriteFileAtomic(j.Path, b.Bytes(), 0o600)
}

// Release ends the session's hold: the lock is dropped and, when no
// journal is left (the edits were saved or given up), its file is
// removed, so a clean quit leaves nothing beside the stack.
func (j *Journal) Release() {
	if j.lock == nil {
		return
	}
	if _, err := os.Lstat(j.Path); errors.Is(err, fs.ErrNotExist) {
		os.Remove(j.Path + lockSuffix)
	}
	j.lock.Close() // closing drops the flock
	j.lock = nil
}

// Clear removes this session's journal; a missing one is not an error.
func (j *Journal) Clear() error {
	err := os.Remove(j.Path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	return err
}

// Found is a recovery file an editing session left, or (Live with no
// Stack) another session that is editing the file with nothing unsaved.
type Found struct {
	Path     string
	PID      int
	Live     bool      // its session is still running (another editor)
	At       time.Time // when it was last written
	For      string    // the stack file it says it belongs to
	Stack    *engine.Stack
	Complete bool  // its end marker and checksum check out
	Foreign  bool  // it belongs to another file (it was renamed or copied here)
	Stale    bool  // the file changed on disk after that session read it
	Err      error // it does not load
}

// FindJournals lists the recovery files of the stack file path (every
// session's, newest first), judged against current, the file's content
// now (nil when it does not exist). This session's own is left out.
func FindJournals(path, stateDir string, current []byte) []Found {
	prefix := journalPrefix(path)
	if path == "" {
		prefix = filepath.Join(stateDir, "untitled"+journalSuffix)
	}
	matches, _ := filepath.Glob(globEscape(prefix) + "*")
	own := JournalFor(path, stateDir).Path
	var out []Found
	for _, p := range matches {
		if p == own || p == own+lockSuffix || !(p == prefix || strings.HasPrefix(p, prefix+".")) {
			continue
		}
		if j, ok := strings.CutSuffix(p, lockSuffix); ok {
			if _, err := os.Lstat(j); err == nil {
				continue // judged with its journal
			}
			if locked(p) { // a live session with nothing unsaved
				f := Found{Path: j, Live: true, For: path}
				if i := strings.LastIndexByte(j, '.'); i >= 0 {
					f.PID, _ = strconv.Atoi(j[i+1:])
				}
				out = append(out, f)
			} else {
				os.Remove(p) // its session has ended
			}
			continue
		}
		out = append(out, readJournal(p, path, current))
	}
	sort.Slice(out, func(a, b int) bool { return out[a].At.After(out[b].At) })
	return out
}

// globEscape quotes the glob metacharacters of a literal path.
func globEscape(s string) string {
	var b strings.Builder
	for _, r := range s {
		if strings.ContainsRune(`*?[\`, r) {
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	return b.String()
}

// readJournal reads and judges one recovery file.
func readJournal(p, path string, current []byte) Found {
	f := Found{Path: p}
	if info, err := os.Lstat(p); err != nil || !info.Mode().IsRegular() {
		f.Err = fmt.Errorf("recovery file %s is not a regular file and was left in place", p)
		return f
	} else {
		f.At = info.ModTime()
	}
	data, err := readFile(p)
	if err != nil {
		f.Err = fmt.Errorf("recovery file %s: %w", p, err)
		return f
	}
	if i := strings.LastIndexByte(p, '.'); i >= 0 {
		f.PID, _ = strconv.Atoi(p[i+1:])
	}
	text := string(data)
	header, body := "", text
	for strings.HasPrefix(body, "# ") {
		nl := strings.IndexByte(body, '\n')
		if nl < 0 {
			break
		}
		line := body[:nl]
		header += line + "\n"
		body = body[nl+1:]
		if v, ok := strings.CutPrefix(line, "# for: "); ok {
			f.For, _ = strconv.Unquote(v)
		}
		if v, ok := strings.CutPrefix(line, "# pid: "); ok {
			f.PID, _ = strconv.Atoi(v)
		}
		if v, ok := strings.CutPrefix(line, "# file-sha256: "); ok {
			f.Stale = v != hashOf(current) // "none" for a file that did not exist, and still does not
		}
	}
	if i := strings.LastIndex(body, "# complete: "); i >= 0 {
		var n int
		var sum string
		if _, err := fmt.Sscanf(body[i:], "# complete: %d %s", &n, &sum); err == nil && n == i {
			h := sha256.Sum256([]byte(body[:i]))
			f.Complete = hex.EncodeToString(h[:]) == sum
		}
		body = body[:i]
	}
	f.Live = locked(p + lockSuffix)
	f.Foreign = f.For != "" && path != "" && !sameFile(f.For, path)
	s, err := stackfile.Load([]byte(body))
	if err != nil {
		f.Err = fmt.Errorf("recovery file %s does not load and was left in place: %w", p, err)
		return f
	}
	f.Stack = s
	return f
}

// sameFile reports whether two paths name one file (or the same name).
func sameFile(a, b string) bool {
	if filepath.Clean(a) == filepath.Clean(b) {
		return true
	}
	ia, errA := os.Stat(a)
	ib, errB := os.Stat(b)
	return errA == nil && errB == nil && os.SameFile(ia, ib)
}

// Trusted reports whether the recovery file can be offered as the file's
// unsaved edits: whole, of this file, made on the content now on disk.
func (f *Found) Trusted() bool {
	return f.Err == nil && f.Complete && !f.Foreign && !f.Stale
}

// Describe says what the recovery file holds and why it is or is not
// trusted, for the question the editor asks.
func (f *Found) Describe() string {
	if f.Err != nil {
		return f.Err.Error()
	}
	s := fmt.Sprintf("unsaved edits from %s (%d layers", f.At.Format("Jan 2 15:04:05"), len(f.Stack.Layers))
	if f.Foreign {
		s += " of " + strconv.Quote(filepath.Base(f.For))
	}
	s += ")"
	var why []string
	if !f.Complete {
		why = append(why, "the recovery file is incomplete (cut short), so layers may be missing")
	}
	if f.Foreign {
		why = append(why, "it was written for another file, "+strconv.Quote(f.For))
	}
	if f.Stale {
		why = append(why, "the file on disk changed after those edits began (it is newer than they are)")
	}
	if len(why) > 0 {
		s += "; " + strings.Join(why, "; ")
	}
	return s
}
