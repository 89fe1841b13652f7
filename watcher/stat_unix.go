//go:build unix

package watcher

import (
	"os"
	"syscall"
)

// inodeOf returns the file's inode number (0 if unknown).
func inodeOf(fi os.FileInfo) uint64 {
	if st, ok := fi.Sys().(*syscall.Stat_t); ok {
		return uint64(st.Ino)
	}
	return 0
}

// openRead opens a file read-only. O_NONBLOCK keeps a FIFO put in a
// watched folder from blocking the watcher; regular files ignore it.
func openRead(name string) (*os.File, error) {
	return os.OpenFile(name, os.O_RDONLY|syscall.O_NONBLOCK, 0)
}
