package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// TestWrite: a successful write replaces the file whole with the mode
// asked for (0600: no umask bits to clear); a failed one leaves the old
// content and no temporary file.
func TestWrite(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "f")
	fail := errors.New("fail")
	cases := []struct {
		name, text string
		perm       os.FileMode
		err        error
		want       string
	}{
		{"new file", "one", 0o600, nil, "one"},
		{"replaced", "two", 0o600, nil, "two"},
		{"failed write keeps the old file", "three", 0o600, fail, "two"},
	}
	for _, c := range cases {
		err := Write(path, c.perm, func(w io.Writer) error {
			io.WriteString(w, c.text)
			return c.err
		})
		if !errors.Is(err, c.err) {
			t.Fatalf("%s: %v, want %v", c.name, err, c.err)
		}
		b, err := os.ReadFile(path)
		if err != nil || string(b) != c.want {
			t.Fatalf("%s: file holds %q (%v), want %q", c.name, b, err, c.want)
		}
		if fi, _ := os.Stat(path); fi.Mode().Perm() != c.perm {
			t.Errorf("%s: mode %v, want %v", c.name, fi.Mode().Perm(), c.perm)
		}
		if entries, _ := os.ReadDir(dir); len(entries) != 1 {
			t.Errorf("%s: %d files in the folder, want only the file (no temporary one left)", c.name, len(entries))
		}
	}
}
