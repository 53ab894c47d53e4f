// Package atomicfile writes files so that a crash, a kill or a full disk at
// any moment leaves either the old content or the new one, never a mix and
// never half a file.
//
// Every write goes to a temporary file in the destination's folder (so the
// final step is a rename within one file system), which is given its mode,
// flushed to disk (fsync) and closed; only then is it renamed over the
// destination (WriteFile, File.Commit) or linked to a name that must not
// exist yet (Create), and the folder itself is flushed so the new name
// survives a power cut. On any failure the temporary file is removed and
// the destination is untouched.
//
// Temporary files are named "." + the destination's name + ".tmp-" + a
// random suffix; IsTemp recognises them, so that a program can remove the
// ones a killed process left behind.
package atomicfile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"syscall"
)

// tempMarker separates the destination's name from the random suffix.
const tempMarker = ".tmp-"

// IsTemp reports whether a file name (without folder) is one of this
// package's temporary files. Names of the older form ".tmp-NNN" count too.
func IsTemp(name string) bool {
	return strings.HasPrefix(name, ".") && strings.Contains(name, tempMarker)
}

// WriteFile replaces path with data and gives it the mode perm (exactly,
// whatever the umask). A reader sees the old file or the new one, and once
// WriteFile returns nil the new content is on disk.
func WriteFile(path string, data []byte, perm fs.FileMode) error {
	f, err := filled(path, data, perm)
	if err != nil {
		return err
	}
	return f.Commit()
}

// Create is WriteFile for a file that must not exist yet: the complete
// temporary file is linked to path, so an existing file (another process's
// save) is never replaced. It returns an error matching fs.ErrExist (with
// errors.Is) when path exists.
func Create(path string, data []byte, perm fs.FileMode) error {
	f, err := filled(path, data, perm)
	if err != nil {
		return err
	}
	tmp, err := f.finish()
	if err != nil {
		return err
	}
	defer os.Remove(tmp)
	if err := os.Link(tmp, path); err != nil {
		if errors.Is(err, fs.ErrExist) {
			return fmt.Errorf("cannot create %s: %w", path, fs.ErrExist)
		}
		return fmt.Errorf("cannot create %s: %w", path, unwrapPath(err))
	}
	return SyncDir(filepath.Dir(path))
}

// File is a file being written in place of another: write to it (it is an
// *os.File), then Commit to put it in place or Abort to drop it. Large
// outputs thus need not be held in memory.
type File struct {
	*os.File
	path string
	perm fs.FileMode
}

// New starts a File that will replace path, with mode perm.
func New(path string, perm fs.FileMode) (*File, error) {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+tempMarker+"*")
	if err != nil {
		return nil, fmt.Errorf("cannot write in the folder %s: %w", dir, unwrapPath(err))
	}
	return &File{File: f, path: path, perm: perm}, nil
}

// Path returns the destination the File replaces.
func (f *File) Path() string { return f.path }

// Abort closes and removes the temporary file, leaving the destination as
// it was. It does nothing after Commit or a previous Abort, so it can be
// deferred.
func (f *File) Abort() {
	if f.File != nil {
		f.File.Close()
		os.Remove(f.File.Name())
		f.File = nil
	}
}

// Commit gives the temporary file its mode, flushes and closes it, and
// renames it over the destination. After a failure the temporary file is
// removed and the destination is untouched.
func (f *File) Commit() error {
	tmp, err := f.finish()
	if err != nil {
		return err
	}
	if err := os.Rename(tmp, f.path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("cannot replace %s: %w", f.path, unwrapPath(err))
	}
	return SyncDir(filepath.Dir(f.path))
}

// finish sets the mode, flushes and closes the temporary file and returns
// its name; the File is spent either way.
func (f *File) finish() (string, error) {
	if f.File == nil {
		return "", fmt.Errorf("cannot write %s: %w", f.path, os.ErrClosed)
	}
	file := f.File
	f.File = nil
	tmp := file.Name()
	err := file.Chmod(f.perm)
	if err == nil {
		err = file.Sync()
	}
	if cerr := file.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		os.Remove(tmp)
		return "", fmt.Errorf("cannot write %s: %w", f.path, unwrapPath(err))
	}
	return tmp, nil
}

// filled returns a File for path holding data, not yet committed.
func filled(path string, data []byte, perm fs.FileMode) (*File, error) {
	f, err := New(path, perm)
	if err != nil {
		return nil, err
	}
	if _, err := f.Write(data); err != nil {
		f.Abort()
		return nil, fmt.Errorf("cannot write %s: %w", path, unwrapPath(err))
	}
	return f, nil
}

// SyncDir flushes a folder's list of names to disk, so that a rename or a
// link in it survives a crash. Windows cannot flush a folder (its renames
// are durable without it), and some file systems refuse to (EINVAL); both
// count as done.
func SyncDir(dir string) error {
	if runtime.GOOS == "windows" {
		return nil
	}
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.Sync(); err != nil && !errors.Is(err, syscall.EINVAL) && !errors.Is(err, errors.ErrUnsupported) {
		return fmt.Errorf("cannot flush the folder %s: %w", dir, unwrapPath(err))
	}
	return nil
}

// unwrapPath drops the *fs.PathError around err: messages name the
// destination, not the temporary file.
func unwrapPath(err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}
