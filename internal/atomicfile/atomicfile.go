// Package atomicfile writes files and folders so that a reader never sees a
// half-written output and an existing output is never replaced by accident:
// content goes to a temporary name in the target folder and is renamed into
// place only when complete.
package atomicfile

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// ErrExists reports an output that exists and may not be overwritten.
var ErrExists = errors.New("already exists (use --force to overwrite)")

// Write writes the file at path through fill. Without force an existing file
// is an error and is left untouched. On any error the temporary file is
// removed and the target is unchanged.
func Write(path string, force bool, fill func(w io.Writer) error) error {
	if !force {
		if _, err := os.Lstat(path); err == nil {
			return fmt.Errorf("%s: %w", path, ErrExists)
		}
	}
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	ok := false
	defer func() {
		if !ok {
			f.Close()
			os.Remove(tmp)
		}
	}()
	bw := bufio.NewWriterSize(f, 1<<20)
	if err := fill(bw); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		return err
	}
	if !force {
		// Re-check just before the rename, so a file that appeared meanwhile survives.
		if _, err := os.Lstat(path); err == nil {
			return fmt.Errorf("%s: %w", path, ErrExists)
		}
	}
	if err := os.Rename(tmp, path); err != nil {
		return err
	}
	ok = true
	return nil
}

// WriteBytes writes b to path atomically.
func WriteBytes(path string, force bool, b []byte) error {
	return Write(path, force, func(w io.Writer) error {
		_, err := w.Write(b)
		return err
	})
}

// Dir is a folder being built under a temporary name beside its final path.
type Dir struct {
	final string
	tmp   string
	force bool
}

// NewDir starts a folder that Commit will move to path. Without force, an
// existing path is an error. The parent folder is created if needed.
func NewDir(path string, force bool) (*Dir, error) {
	path = filepath.Clean(path)
	if st, err := os.Stat(path); err == nil {
		if !force {
			return nil, fmt.Errorf("%s: %w", path, ErrExists)
		}
		if !st.IsDir() {
			return nil, fmt.Errorf("%s: exists and is not a folder", path)
		}
	}
	parent := filepath.Dir(path)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	tmp, err := os.MkdirTemp(parent, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return nil, err
	}
	if err := os.Chmod(tmp, 0o755); err != nil {
		os.RemoveAll(tmp)
		return nil, err
	}
	return &Dir{final: path, tmp: tmp, force: force}, nil
}

// Path returns the temporary folder to write into.
func (d *Dir) Path() string { return d.tmp }

// Join returns a path inside the temporary folder.
func (d *Dir) Join(name string) string { return filepath.Join(d.tmp, name) }

// Abort removes the temporary folder; it is safe after Commit.
func (d *Dir) Abort() {
	if d.tmp != "" {
		os.RemoveAll(d.tmp)
	}
}

// Commit moves the folder into place. With force, an existing folder is
// moved aside first and removed only once the new one is in place.
func (d *Dir) Commit() error {
	var old string
	if _, err := os.Stat(d.final); err == nil {
		if !d.force {
			return fmt.Errorf("%s: %w", d.final, ErrExists)
		}
		old = d.tmp + ".old"
		if err := os.Rename(d.final, old); err != nil {
			return err
		}
	}
	if err := os.Rename(d.tmp, d.final); err != nil {
		if old != "" {
			os.Rename(old, d.final)
		}
		return err
	}
	d.tmp = ""
	if old != "" {
		os.RemoveAll(old)
	}
	return nil
}
