package store

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"syscall"
)

// ErrNotRegular is wrapped by the error for a path that names something
// other than a regular file: a named pipe, a device, a socket or a folder.
var ErrNotRegular = errors.New("not a regular file")

// CheckRegular refuses a path that names anything but a regular file
// (symbolic links are followed), without opening it: opening a named pipe
// for reading waits for a writer, and reading a device such as /dev/zero
// never ends. A missing file gives the fs.ErrNotExist error of os.Stat.
func CheckRegular(path string) error {
	fi, err := os.Stat(path)
	if err != nil {
		return err
	}
	return regular(path, fi.Mode())
}

// openRegular opens path for reading after CheckRegular. The open does not
// block even if a named pipe is swapped in after the check (O_NONBLOCK),
// and what was opened is checked again.
func openRegular(path string) (*os.File, error) {
	if err := CheckRegular(path); err != nil {
		return nil, err
	}
	f, err := os.OpenFile(path, os.O_RDONLY|syscall.O_NONBLOCK, 0)
	if err != nil {
		return nil, err
	}
	fi, err := f.Stat()
	if err == nil {
		err = regular(path, fi.Mode())
	}
	if err != nil {
		f.Close()
		return nil, err
	}
	return f, nil
}

func regular(path string, m fs.FileMode) error {
	if m.IsRegular() {
		return nil
	}
	fix := "give the path of a stack file (.yaml)"
	switch {
	case m&fs.ModeDir != 0:
		fix = "give the path of a stack file inside it, e.g. " + path + string(os.PathSeparator) + "net.yaml"
	case m&fs.ModeNamedPipe != 0:
		fix = "to read a stack from a pipe, give - and redirect it, e.g. stackfit report - < " + path
	}
	return fmt.Errorf("%s is %s, not a stack file (%w); %s", path, describeMode(m), ErrNotRegular, fix)
}

// describeMode names the kind of file m is, for messages.
func describeMode(m fs.FileMode) string {
	switch {
	case m&fs.ModeDir != 0:
		return "a folder"
	case m&fs.ModeNamedPipe != 0:
		return "a named pipe"
	case m&fs.ModeSocket != 0:
		return "a socket"
	case m&fs.ModeCharDevice != 0:
		return "a character device"
	case m&fs.ModeDevice != 0:
		return "a block device"
	case m&fs.ModeSymlink != 0:
		return "a symbolic link"
	}
	return "a special file"
}

// SameFile reports whether paths a and b name one existing file, however
// they are spelled: through "..", a symbolic link or a hard link.
func SameFile(a, b string) bool {
	fa, err := os.Stat(a)
	if err != nil {
		return false
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false
	}
	return os.SameFile(fa, fb)
}

// OpenRegular opens a file for reading as the stack loader does: refused
// unless it is a regular file, and never blocking on a named pipe.
func OpenRegular(path string) (*os.File, error) { return openRegular(path) }
