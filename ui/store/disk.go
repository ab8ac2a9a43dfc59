package store

import "stackfit/engine"

// Disk reads and writes stack files on the local disk: the file access the
// command line gives the editor.
type Disk struct{}

// Load reads the stack file at path (LoadFile).
func (Disk) Load(path string) (*engine.Stack, error) { return LoadFile(path) }

// Save writes s to path in canonical form, atomically (SaveFile).
func (Disk) Save(path string, s *engine.Stack) error { return SaveFile(path, s) }
