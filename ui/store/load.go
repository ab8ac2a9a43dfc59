package store

import (
	"errors"
	"fmt"
	"io"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// LoadFile reads and parses the stack file at path; errors carry the path.
// A file over stackfile.MaxFileBytes is refused without reading the rest;
// anything but a regular file (a named pipe, a device, a socket, a folder)
// is refused without reading it (ErrNotRegular), so loading never waits.
func LoadFile(path string) (*engine.Stack, error) {
	s, _, err := loadFile(path)
	return s, err
}

// loadFile is LoadFile that also returns the bytes it parsed.
func loadFile(path string) (*engine.Stack, []byte, error) {
	f, err := openRegular(path)
	if errors.Is(err, ErrNotRegular) {
		return nil, nil, err
	}
	if err != nil {
		return nil, nil, fmt.Errorf("open stack file: %w", err)
	}
	defer f.Close()
	data, err := readLimited(f, stackfile.MaxFileBytes)
	if err != nil {
		return nil, nil, fmt.Errorf("read %s: %w", path, err)
	}
	s, err := stackfile.Load(data)
	var list stackfile.ErrorList
	if errors.As(err, &list) {
		for _, e := range list {
			e.File = path
		}
	}
	if err != nil {
		return nil, nil, err
	}
	return s, data, nil
}

// readLimited reads r to the end, failing once more than limit bytes come.
func readLimited(r io.Reader, limit int64) ([]byte, error) {
	data, err := io.ReadAll(io.LimitReader(r, limit+1))
	if err != nil {
		return nil, err
	}
	if int64(len(data)) > limit {
		return nil, fmt.Errorf("%w: over %d bytes (8 MiB)", stackfile.ErrTooLarge, limit)
	}
	return data, nil
}
