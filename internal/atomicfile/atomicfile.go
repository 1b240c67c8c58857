// Package atomicfile writes a file whole or not at all, on
// github.com/google/renameio: the bytes go to a temporary file in the same
// folder, which is synced and renamed over the name only when everything
// was written, so a reader never sees half a file and a failed write
// leaves the old file (or nothing) in place. The rename is atomic on POSIX
// file systems.
package atomicfile

import (
	"bufio"
	"io"
	"os"

	"github.com/google/renameio/v2"
)

// Write writes path whole with what fn writes, with permission perm (the
// umask applies); if fn returns an error, path is left as it was and the
// error is returned.
func Write(path string, perm os.FileMode, fn func(w io.Writer) error) error {
	f, err := renameio.NewPendingFile(path, renameio.WithPermissions(perm))
	if err != nil {
		return err
	}
	defer f.Cleanup() // removes the temporary file unless it was renamed
	bw := bufio.NewWriter(f)
	if err := fn(bw); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return err
	}
	return f.CloseAtomicallyReplace()
}
