//go:build unix

package server

import (
	"os"
	"syscall"
)

// lockDir takes an exclusive advisory lock on the file path (created if
// needed) without waiting. It returns the function that releases it, or nil
// when another process holds the lock (or locking is not possible).
func lockDir(path string) func() {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o600)
	if err != nil {
		return nil
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		return nil
	}
	return func() {
		syscall.Flock(int(f.Fd()), syscall.LOCK_UN)
		f.Close()
	}
}
