//go:build !unix

package watcher

import "os"

// inodeOf returns 0: inodes are not available here, so rotation is told
// by size and fingerprint only.
func inodeOf(fi os.FileInfo) uint64 { return 0 }

// openRead opens a file read-only.
func openRead(name string) (*os.File, error) { return os.Open(name) }
