package main

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"golang.org/x/term"

	"handoff/ingest"
	"handoff/internal/atomicfile"
	"handoff/internal/beside"
	"handoff/round"
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
	if s, ok := beside.Served(dir); ok {
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

// readFiles makes f show a progress bar per file (bytes read) and per
// folder of images (images read).
func readFiles[T any](cmd *cobra.Command, f *ingest.Files[T]) *ingest.Files[T] {
	f.Open = func(path string) (io.ReadCloser, error) {
		file, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		size := int64(-1)
		if fi, err := file.Stat(); err == nil && fi.Mode().IsRegular() {
			size = fi.Size()
		}
		bar := newProgress(cmd, size, filepath.Base(path))
		if interactive(cmd) && size >= 0 {
			progressbar.OptionShowBytes(true)(bar)
		}
		r := progressbar.NewReader(file, bar)
		return readCloser{&r, func() error { bar.Finish(); return file.Close() }}, nil
	}
	f.Folder = func(path string, n int) (func(), func()) {
		bar := newProgress(cmd, int64(n), filepath.Base(path))
		return func() { bar.Add(1) }, func() { bar.Finish() }
	}
	return f
}

type readCloser struct {
	io.Reader
	close func() error
}

func (r readCloser) Close() error { return r.close() }

// located adds the file and line of the record being read to a store data
// error.
func located[T any](err error, f *ingest.Files[T]) error {
	var de *store.DataError
	if loc, ok := f.Where(); ok && errors.As(err, &de) {
		return ingest.At(loc, de.Field, de.Err)
	}
	return err
}

// sourceUsage makes a badly named input file a usage error (exit 2).
func sourceUsage(err error) error {
	if errors.Is(err, ingest.ErrSource) {
		return usageErrorf("%v", strings.TrimPrefix(err.Error(), ingest.ErrSource.Error()+": "))
	}
	return err
}

// writeOutput writes what fn writes to path, whole or not at all
// (atomicfile), or to stdout when path is "" or "-".
func writeOutput(cmd *cobra.Command, path string, fn func(w io.Writer) error) error {
	if path == "" || path == "-" {
		bw := bufio.NewWriter(cmd.OutOrStdout())
		if err := fn(bw); err != nil {
			return err
		}
		return bw.Flush()
	}
	return atomicfile.Write(path, 0o666, fn)
}

// onStore opens the project in dir, runs fn on it, with a spinner named
// busy ("" for none) while it runs, and closes the project.
func onStore(cmd *cobra.Command, dir, busy string, fn func(s *store.Store) error) error {
	s, err := openStore(dir)
	if err != nil {
		return err
	}
	defer s.Close()
	if busy == "" {
		return fn(s)
	}
	bar := newProgress(cmd, -1, busy)
	err = fn(s)
	bar.Finish()
	return err
}

// show prints v as JSON when asJSON, otherwise text.
func show(cmd *cobra.Command, asJSON bool, v any, text string) error {
	if asJSON {
		return printJSON(cmd, v)
	}
	outf(cmd, "%s", text)
	return nil
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

// statusSections are the sections commands add to `loop status` (after
// round.Sections).
var statusSections []round.Section

// registerStatus adds a section to `loop status`. Call it from init.
func registerStatus(name string, fn func(s *store.Store) (any, string, error)) {
	statusSections = append(statusSections, round.Section{Name: name, Fn: fn})
}
