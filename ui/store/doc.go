// Package store is stackfit's files on disk: reading stack files by path,
// atomic saves, the crash-recovery journal, and where the keys file and
// the recovery folder live (worked out from values the command line reads
// from the environment once, at start). The engine and its stackfile codec
// only turn bytes into stacks and back; the editor reaches the files here
// through what the command line hands it.
package store
