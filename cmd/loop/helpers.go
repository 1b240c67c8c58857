package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"sort"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"golang.org/x/term"

	"handoff"
	"handoff/store"
)

// importChunk, if > 0, overrides the store's records per import
// transaction (tests set it small to exercise the rollback of chunked
// imports).
var importChunk int

// openStore opens the project in dir. In a process that serves dir
// (`loop serve`, running a command sent to it) it returns a borrowed handle
// on the open store, whose Close leaves it open; where another process
// holds the project, the error says which server and what to do.
func openStore(dir string) (*store.Store, error) {
	if s, ok := servedStore(dir); ok {
		s.ImportChunk = importChunk
		return s, nil
	}
	if err := besideError(dir); err != nil {
		return nil, err
	}
	s, err := store.Open(dir)
	if err != nil {
		return nil, inUse(dir, err)
	}
	s.ImportChunk = importChunk
	return s, nil
}

// createStore makes a new project in dir with codebook cb.
func createStore(dir string, cb handoff.Codebook, cmd *cobra.Command) (*store.Store, error) {
	return store.Create(dir, cb, source(cmd))
}

// source returns the audit "who/what" string for this run: the command line
// as typed.
func source(cmd *cobra.Command) string {
	if ctx := cmd.Context(); ctx != nil {
		if s, ok := ctx.Value(invocationKey).(string); ok {
			return s
		}
	}
	return cmd.CommandPath()
}

// quiet reports whether --quiet was given.
func quiet(cmd *cobra.Command) bool {
	q, _ := cmd.Flags().GetBool("quiet")
	return q
}

// interactive reports whether progress bars should be drawn: stdout is the
// process's terminal and --quiet was not given.
func interactive(cmd *cobra.Command) bool {
	if quiet(cmd) {
		return false
	}
	f, ok := cmd.OutOrStdout().(interface{ Fd() uintptr })
	return ok && term.IsTerminal(int(f.Fd()))
}

// newProgress returns a progress bar on stderr counting to max (-1 for a
// spinner of unknown length), or a silent one when not interactive. Call
// Finish when done.
func newProgress(cmd *cobra.Command, max int64, desc string) *progressbar.ProgressBar {
	if !interactive(cmd) {
		return progressbar.DefaultSilent(max, desc)
	}
	return progressbar.NewOptions64(max,
		progressbar.OptionSetDescription(desc),
		progressbar.OptionSetWriter(os.Stderr),
		progressbar.OptionShowCount(),
		progressbar.OptionThrottle(100*time.Millisecond),
		progressbar.OptionSetWidth(30),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionOnCompletion(func() { fmt.Fprint(os.Stderr, "\r") }),
	)
}

// progressFile opens path for reading with a byte-counting progress bar.
// Close the returned file and Finish the bar when done.
func progressFile(cmd *cobra.Command, path, desc string) (io.ReadCloser, *progressbar.ProgressBar, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	size := int64(-1)
	if fi, err := f.Stat(); err == nil && fi.Mode().IsRegular() {
		size = fi.Size()
	}
	bar := newProgress(cmd, size, desc)
	if interactive(cmd) && size >= 0 {
		progressbar.OptionShowBytes(true)(bar)
	}
	r := progressbar.NewReader(f, bar)
	return struct {
		io.Reader
		io.Closer
	}{&r, f}, bar, nil
}

// printJSON writes v as indented JSON to the command's stdout.
func printJSON(cmd *cobra.Command, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(cmd.OutOrStdout(), "%s\n", b)
	return err
}

// outf writes a result line to stdout (always printed).
func outf(cmd *cobra.Command, format string, a ...any) {
	fmt.Fprintf(cmd.OutOrStdout(), format, a...)
}

// hintf writes a hint about what to do next to stdout unless --quiet (it
// is not a result).
func hintf(cmd *cobra.Command, format string, a ...any) {
	if !quiet(cmd) {
		fmt.Fprintf(cmd.OutOrStdout(), format, a...)
	}
}

// infof writes a note to stderr unless --quiet.
func infof(cmd *cobra.Command, format string, a ...any) {
	if !quiet(cmd) {
		fmt.Fprintf(cmd.ErrOrStderr(), format, a...)
	}
}

// statusSection adds one section to `loop status`: fn returns a value for
// the JSON output (under name) and the text lines for the plain output. A
// section with nothing to say returns (nil, "", nil) and is left out.
type statusSection struct {
	name string
	fn   func(s *store.Store) (jsonValue any, text string, err error)
}

var statusSections []statusSection

// registerStatus adds a section to `loop status`. Call it from init.
func registerStatus(name string, fn func(s *store.Store) (any, string, error)) {
	statusSections = append(statusSections, statusSection{name, fn})
}

func sortedStrings(s []string) []string {
	sort.Strings(s)
	return s
}
