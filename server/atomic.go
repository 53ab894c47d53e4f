package server

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
)

// writeTemp writes data to a new temporary file in dir, flushed to disk
// (fsync) and closed, and returns its path. The file has mode 0600.
func writeTemp(dir string, data []byte) (string, error) {
	f, err := os.CreateTemp(dir, ".tmp-*")
	if err != nil {
		return "", err
	}
	tmp := f.Name()
	if _, err := f.Write(data); err != nil {
		f.Close()
		os.Remove(tmp)
		return "", err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return "", err
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return "", err
	}
	return tmp, nil
}

// writeFileAtomic replaces dir/name with data so that a crash at any moment
// leaves either the old or the new content: temporary file in the same
// directory, fsync, rename, fsync of the directory.
func writeFileAtomic(dir, name string, data []byte) error {
	tmp, err := writeTemp(dir, data)
	if err != nil {
		return err
	}
	if err := os.Rename(tmp, filepath.Join(dir, name)); err != nil {
		os.Remove(tmp)
		return err
	}
	return syncDir(dir)
}

// createFileAtomic is writeFileAtomic for a file that must not exist yet:
// it links the temporary file into place, so an existing file (another
// process's save) is never replaced. It returns fs.ErrExist in that case.
func createFileAtomic(dir, name string, data []byte) error {
	tmp, err := writeTemp(dir, data)
	if err != nil {
		return err
	}
	defer os.Remove(tmp)
	if err := os.Link(tmp, filepath.Join(dir, name)); err != nil {
		if errors.Is(err, fs.ErrExist) {
			return fs.ErrExist
		}
		return err
	}
	return syncDir(dir)
}

// syncDir flushes a directory's entries (a rename or link) to disk. Windows
// cannot fsync directories; there the rename itself is durable enough.
func syncDir(dir string) error {
	if runtime.GOOS == "windows" {
		return nil
	}
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}
