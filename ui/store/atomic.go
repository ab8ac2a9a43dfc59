package store

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"syscall"
)

// fileSystem is what an atomic write needs from the operating system; the
// tests put a failing one in its place to simulate a full disk, a
// read-only folder or an interrupted rename.
type fileSystem interface {
	CreateTemp(dir, pattern string) (tempFile, error)
	Rename(oldpath, newpath string) error
	Remove(name string) error
	Stat(name string) (fs.FileInfo, error)
}

// tempFile is the part of *os.File an atomic write uses.
type tempFile interface {
	io.Writer
	Name() string
	Chmod(fs.FileMode) error
	Chown(uid, gid int) error
	Sync() error
	Close() error
}

type osFS struct{}

func (osFS) CreateTemp(dir, pattern string) (tempFile, error) { return os.CreateTemp(dir, pattern) }
func (osFS) Rename(o, n string) error                         { return os.Rename(o, n) }
func (osFS) Remove(n string) error                            { return os.Remove(n) }
func (osFS) Stat(n string) (fs.FileInfo, error)               { return os.Stat(n) }

// WriteFileAtomic replaces path with data so that a reader sees either the
// old file or the new one, never a mix: it writes a temporary file in the
// same folder, syncs it, and renames it over path. A symbolic link is
// followed: its target is replaced and the link stays. An existing file
// keeps its permissions and, where the process may set them, its owner
// and group; a new one gets perm. On any failure — a read-only folder, a
// full disk, an interrupted write — the old file is left byte-identical,
// the temporary file is removed, and the error says what happened.
func WriteFileAtomic(path string, data []byte, perm fs.FileMode) error {
	return writeAtomic(osFS{}, path, func(w io.Writer) error { _, err := w.Write(data); return err }, perm)
}

// WriteAtomic is WriteFileAtomic for output produced a piece at a time:
// write streams the new content through a buffer into the temporary
// file, so a report or an export of any size is never held in memory
// whole. An error from write leaves the old file as it was.
func WriteAtomic(path string, perm fs.FileMode, write func(io.Writer) error) error {
	return writeAtomic(osFS{}, path, write, perm)
}

func writeAtomic(fsys fileSystem, path string, write func(io.Writer) error, perm fs.FileMode) (err error) {
	path = Target(path)
	owner := -1
	var group int
	if info, statErr := fsys.Stat(path); statErr == nil {
		if !info.Mode().IsRegular() {
			return fmt.Errorf("save %s: not a regular file; choose another name", path)
		}
		perm = info.Mode().Perm()
		if st, ok := info.Sys().(*syscall.Stat_t); ok {
			owner, group = int(st.Uid), int(st.Gid)
		}
	} else if !errors.Is(statErr, fs.ErrNotExist) {
		return fmt.Errorf("save %s: %w", path, statErr)
	}
	dir := filepath.Dir(path)
	tmp, err := fsys.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("save %s: cannot create a file in %s (%w); save elsewhere or fix the folder's permissions — the old file is unchanged", path, dir, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			fsys.Remove(tmp.Name())
		}
	}()
	var werr writeErr
	bw := bufio.NewWriterSize(writerFunc(func(p []byte) (int, error) {
		n, err := tmp.Write(p)
		if err != nil {
			werr.err = err
		}
		return n, err
	}), 64<<10)
	if err = write(bw); err == nil {
		err = bw.Flush()
	}
	if err != nil {
		if werr.err != nil {
			return fmt.Errorf("save %s: write failed (%w); is the disk full? The old file is unchanged", path, werr.err)
		}
		return fmt.Errorf("save %s: %w; the old file is unchanged", path, err)
	}
	if err = tmp.Chmod(perm); err != nil {
		return fmt.Errorf("save %s: set permissions: %w; the old file is unchanged", path, err)
	}
	if owner >= 0 && (owner != os.Getuid() || group != os.Getgid()) {
		tmp.Chown(owner, group) // best effort: only root may give a file away
	}
	if err = tmp.Sync(); err != nil {
		return fmt.Errorf("save %s: sync failed (%w); the old file is unchanged", path, err)
	}
	if err = tmp.Close(); err != nil {
		return fmt.Errorf("save %s: close failed (%w); the old file is unchanged", path, err)
	}
	if err = fsys.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("save %s: rename failed (%w); the old file is unchanged", path, err)
	}
	if d, derr := os.Open(dir); derr == nil {
		d.Sync() // best effort: persist the rename itself
		d.Close()
	}
	return nil
}

// Target is the file a write to path replaces: path itself, or the file a
// symbolic link at path leads to (resolved through every link, relative
// links from their own folder, a dangling one to where it points).
func Target(path string) string {
	for range 32 { // a loop of links ends here; the write then fails on it
		info, err := os.Lstat(path)
		if err != nil || info.Mode()&fs.ModeSymlink == 0 {
			return path
		}
		dest, err := os.Readlink(path)
		if err != nil {
			return path
		}
		if !filepath.IsAbs(dest) {
			dest = filepath.Join(filepath.Dir(path), dest)
		}
		path = dest
	}
	return path
}

// writeErr keeps the first error the temporary file gave, so a failed
// write is reported as the disk's fault and not as the producer's.
type writeErr struct{ err error }

// writerFunc adapts a function to io.Writer.
type writerFunc func([]byte) (int, error)

func (f writerFunc) Write(p []byte) (int, error) { return f(p) }
