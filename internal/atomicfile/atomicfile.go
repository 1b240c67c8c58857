// Package atomicfile writes a file whole or not at all: the bytes go to a
// temporary file beside it (the name with ".partial" added), which is
// renamed over the name only when everything was written and closed, so a
// reader never sees half a file and a failed write leaves the old file (or
// nothing) in place. The rename is atomic on POSIX file systems.
package atomicfile

import (
	"bufio"
	"errors"
	"io"
	"os"
)

// File is a file being written; Commit puts it in place, Abort drops it.
// Writes are buffered.
type File struct {
	*bufio.Writer
	f          *os.File
	path, temp string
}

// Create starts writing path with permission perm (before the umask; the
// mode is that of a new file even when path exists). An old temporary file
// left by a crash is replaced.
func Create(path string, perm os.FileMode) (*File, error) {
	temp := path + ".partial"
	if err := os.Remove(temp); err != nil && !errors.Is(err, os.ErrNotExist) {
		return nil, err
	}
	f, err := os.OpenFile(temp, os.O_WRONLY|os.O_CREATE|os.O_EXCL, perm)
	if err != nil {
		return nil, err
	}
	return &File{Writer: bufio.NewWriter(f), f: f, path: path, temp: temp}, nil
}

// Commit flushes and closes the file and renames it into place. On an
// error the temporary file is removed and path is left as it was.
func (f *File) Commit() error {
	err := f.Flush()
	if cerr := f.f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(f.temp, f.path)
	}
	if err != nil {
		os.Remove(f.temp)
	}
	return err
}

// Abort closes and removes the temporary file; path is left as it was.
func (f *File) Abort() {
	f.f.Close()
	os.Remove(f.temp)
}

// Write writes path whole with what fn writes (see Create for perm); if fn
// returns an error, path is left as it was and the error is returned.
func Write(path string, perm os.FileMode, fn func(w io.Writer) error) error {
	f, err := Create(path, perm)
	if err != nil {
		return err
	}
	if err := fn(f); err != nil {
		f.Abort()
		return err
	}
	return f.Commit()
}
