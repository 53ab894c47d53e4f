package main

import (
	"fmt"
	"os"
	"path/filepath"
)

// writeFileAtomic writes data to path through a temporary file in the same
// folder, synced and renamed, so a crash leaves either the old or the new file.
func writeFileAtomic(path string, data []byte) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("cannot write in %s: %v", dir, err)
	}
	tmp := f.Name()
	defer os.Remove(tmp)
	if _, err := f.Write(data); err != nil {
		f.Close()
		return fmt.Errorf("cannot write %s: %v", path, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("cannot write %s: %v", path, err)
	}
	if err := f.Close(); err != nil {
		return fmt.Errorf("cannot write %s: %v", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		return fmt.Errorf("cannot replace %s: %v", path, err)
	}
	if d, err := os.Open(dir); err == nil {
		_ = d.Sync()
		d.Close()
	}
	return nil
}

// atomicFile streams a file's content to a temporary file in the same
// folder and puts it in place only on Commit, so large outputs need not be
// held in memory and a failure leaves the old file untouched.
type atomicFile struct {
	*os.File
	path string
}

func createAtomic(path string) (*atomicFile, error) {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return nil, fmt.Errorf("cannot write in %s: %v", dir, err)
	}
	return &atomicFile{File: f, path: path}, nil
}

// Abort removes the temporary file; after Commit it does nothing.
func (a *atomicFile) Abort() {
	if a.File != nil {
		a.File.Close()
		os.Remove(a.File.Name())
		a.File = nil
	}
}

// Commit syncs the temporary file and renames it over the destination.
func (a *atomicFile) Commit() error {
	f := a.File
	a.File = nil
	tmp := f.Name()
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("cannot write %s: %v", a.path, err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("cannot write %s: %v", a.path, err)
	}
	if err := os.Rename(tmp, a.path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("cannot replace %s: %v", a.path, err)
	}
	if d, err := os.Open(filepath.Dir(a.path)); err == nil {
		_ = d.Sync()
		d.Close()
	}
	return nil
}
