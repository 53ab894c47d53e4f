package workbook

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"

	"veer/internal/atomicfile"
)

// BackupPath returns where Refresh keeps the previous version of path:
// the name with ".bak" before the extension (screening.xlsx →
// screening.bak.xlsx), so the backup opens in a spreadsheet program.
func BackupPath(path string) string {
	ext := filepath.Ext(path)
	return strings.TrimSuffix(path, ext) + ".bak" + ext
}

// lockFiles lists the lock files that spreadsheet programs keep beside a
// workbook they have open: LibreOffice writes ".~lock.NAME#"; Excel writes
// an owner file "~$NAME" (for long names Office programs have also been seen
// to drop the first two characters, "~$" + NAME[2:]; recalled from memory,
// so both forms are checked).
func lockFiles(path string) []string {
	dir, name := filepath.Split(path)
	out := []string{
		filepath.Join(dir, ".~lock."+name+"#"),
		filepath.Join(dir, "~$"+name),
	}
	if len(name) > 2 {
		out = append(out, filepath.Join(dir, "~$"+name[2:]))
	}
	return out
}

// checkWritable refuses a workbook that is open in another program, read
// only, or in a folder veer cannot write to. It returns the file's mode.
func checkWritable(path string) (fs.FileMode, error) {
	fi, err := os.Stat(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return 0, fmt.Errorf("cannot find the workbook %s", path)
		}
		return 0, fmt.Errorf("cannot read the workbook %s: %v", path, err)
	}
	if !fi.Mode().IsRegular() {
		return 0, fmt.Errorf("%s is not a regular file", path)
	}
	for _, l := range lockFiles(path) {
		if _, err := os.Lstat(l); err == nil {
			return 0, fmt.Errorf("the workbook %s is open in a spreadsheet program (lock file %s); close it there and try again. Nothing was written",
				path, filepath.Base(l))
		}
	}
	if fi.Mode().Perm()&0o200 == 0 {
		return 0, fmt.Errorf("the workbook %s is read-only; allow writing to it (or save a copy) and try again. Nothing was written", path)
	}
	w, err := os.OpenFile(path, os.O_WRONLY, 0)
	if err != nil {
		return 0, fmt.Errorf("the workbook %s cannot be written (%v); nothing was written", path, unwrapPathError(err))
	}
	w.Close()
	return fi.Mode().Perm(), nil
}

func unwrapPathError(err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// replaceAtomic writes data produced by write into a temporary file beside
// path (atomicfile), keeps a copy of the current file at BackupPath(path)
// and puts the new file in place. On any error path is untouched.
func replaceAtomic(path string, mode fs.FileMode, write func(io.Writer) error) error {
	f, err := atomicfile.New(path, mode)
	if err != nil {
		return fmt.Errorf("%v; nothing was written", err)
	}
	defer f.Abort()
	if err := write(f); err != nil {
		return fmt.Errorf("writing the workbook: %v; the original was not changed", err)
	}
	if err := backup(path, mode); err != nil {
		return err
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("%v; the original was not changed", err)
	}
	return nil
}

// backup copies path to BackupPath(path), itself atomically, so an
// interrupted backup never leaves a half-written copy.
func backup(path string, mode fs.FileMode) error {
	src, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("keeping a backup of the workbook: %v; nothing was written", err)
	}
	defer src.Close()
	f, err := atomicfile.New(BackupPath(path), mode)
	if err != nil {
		return fmt.Errorf("keeping a backup of the workbook: %v; nothing was written", err)
	}
	defer f.Abort()
	if _, err := io.Copy(f, src); err != nil {
		return fmt.Errorf("keeping a backup of the workbook: %v; nothing was written", err)
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("keeping a backup of the workbook: %v; nothing was written", err)
	}
	return nil
}
