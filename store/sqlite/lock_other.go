//go:build !unix

package sqlite

import "os"

// tryLock does not lock where flock is missing.
func tryLock(f *os.File) (bool, error) { return false, nil }

func unlock(f *os.File) {}
