package cli

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"handoff/ingest"
	"handoff/internal/atomicfile"
	"handoff/store"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"golang.org/x/term"
)

// Source returns the audit "who/what" string for this run: the command line
// as typed.
func Source(cmd *cobra.Command) string {
	if ctx := cmd.Context(); ctx != nil {
		if s, ok := ctx.Value(invocationKey).(string); ok {
			return s
		}
	}
	return cmd.CommandPath()
}

// Quiet reports whether --quiet was given.
func Quiet(cmd *cobra.Command) bool {
	q, _ := cmd.Flags().GetBool("quiet")
	return q
}

// Interactive reports whether progress bars should be drawn: stdout is the
// process's terminal and --quiet was not given.
func Interactive(cmd *cobra.Command) bool {
	if Quiet(cmd) {
		return false
	}
	f, ok := cmd.OutOrStdout().(interface{ Fd() uintptr })
	return ok && term.IsTerminal(int(f.Fd()))
}

// Progress returns a progress bar on stderr counting to max (-1 for a
// spinner of unknown length), or a silent one when not interactive. Call
// Finish when done.
func Progress(cmd *cobra.Command, max int64, desc string) *progressbar.ProgressBar {
	if !Interactive(cmd) {
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

// ReadFiles makes f show a progress bar per file (bytes read) and per
// folder of images (images read).
func ReadFiles[T any](cmd *cobra.Command, f *ingest.Files[T]) *ingest.Files[T] {
	f.Open = func(path string) (io.ReadCloser, error) {
		file, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		size := int64(-1)
		if fi, err := file.Stat(); err == nil && fi.Mode().IsRegular() {
			size = fi.Size()
		}
		bar := Progress(cmd, size, filepath.Base(path))
		if Interactive(cmd) && size >= 0 {
			progressbar.OptionShowBytes(true)(bar)
		}
		r := progressbar.NewReader(file, bar)
		return readCloser{&r, func() error { bar.Finish(); return file.Close() }}, nil
	}
	f.Folder = func(path string, n int) (func(), func()) {
		bar := Progress(cmd, int64(n), filepath.Base(path))
		return func() { bar.Add(1) }, func() { bar.Finish() }
	}
	return f
}

type readCloser struct {
	io.Reader
	close func() error
}

func (r readCloser) Close() error { return r.close() }

// Located adds the file and line of the record being read to a store data
// error.
func Located[T any](err error, f *ingest.Files[T]) error {
	var de *store.DataError
	if loc, ok := f.Where(); ok && errors.As(err, &de) {
		return ingest.At(loc, de.Field, de.Err)
	}
	return err
}

// SourceUsage makes a badly named input file a usage error (exit 2).
func SourceUsage(err error) error {
	if errors.Is(err, ingest.ErrSource) {
		return Usagef("%v", strings.TrimPrefix(err.Error(), ingest.ErrSource.Error()+": "))
	}
	return err
}

// Write writes what fn writes to path, whole or not at all
// (atomicfile), or to stdout when path is "" or "-".
func Write(cmd *cobra.Command, path string, fn func(w io.Writer) error) error {
	if path == "" || path == "-" {
		bw := bufio.NewWriter(cmd.OutOrStdout())
		if err := fn(bw); err != nil {
			return err
		}
		return bw.Flush()
	}
	return atomicfile.Write(path, 0o666, fn)
}

// Show prints v as JSON when asJSON, otherwise text.
func Show(cmd *cobra.Command, asJSON bool, v any, text string) error {
	if asJSON {
		return JSON(cmd, v)
	}
	Out(cmd, "%s", text)
	return nil
}

// JSON writes v as indented JSON to the command's stdout.
func JSON(cmd *cobra.Command, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	_, err = fmt.Fprintf(cmd.OutOrStdout(), "%s\n", b)
	return err
}

// Out writes a result line to stdout (always printed).
func Out(cmd *cobra.Command, format string, a ...any) {
	fmt.Fprintf(cmd.OutOrStdout(), format, a...)
}

// Hint writes a hint about what to do next to stdout unless --quiet (it
// is not a result).
func Hint(cmd *cobra.Command, format string, a ...any) {
	if !Quiet(cmd) {
		fmt.Fprintf(cmd.OutOrStdout(), format, a...)
	}
}

// Info writes a note to stderr unless --quiet.
func Info(cmd *cobra.Command, format string, a ...any) {
	if !Quiet(cmd) {
		fmt.Fprintf(cmd.ErrOrStderr(), format, a...)
	}
}

// Done confirms on stdout, unless --quiet, a change that only echoes what
// was asked (a project created, a setting changed): such a confirmation is
// not a result. Results — reports, tokens, tables, and the counts of an
// import or a revocation, which say what actually changed — are written
// with outf whatever --quiet says.
func Done(cmd *cobra.Command, format string, a ...any) {
	if !Quiet(cmd) {
		fmt.Fprintf(cmd.OutOrStdout(), format, a...)
	}
}

// Numbers reads a comma-separated list of numbers given to flag (spaces
// around the commas allowed) with parse, each kept only when ok says so; a
// bad one is a usage error naming the flag and what it wants.
func Numbers[T any](flag, s, want string, parse func(string) (T, error), ok func(T) bool) ([]T, error) {
	var out []T
	for _, f := range strings.Split(s, ",") {
		x, err := parse(strings.TrimSpace(f))
		if err != nil || !ok(x) {
			return nil, Usagef("--%s %q: want %s", flag, s, want)
		}
		out = append(out, x)
	}
	return out, nil
}

// Report prints a report as every reporting command does. With html set,
// writeHTML's form is written to that file whole (Write; "-" is standard
// output) and, unless --quiet, a note on stderr says "what written to
// FILE". Then v is printed as JSON when asJSON, or else the text form that
// text writes unless the HTML was written with --quiet (an HTML report
// asked for quietly is the whole result). Nothing more is printed when the
// HTML went to standard output.
func Report(cmd *cobra.Command, html, what string, writeHTML func(io.Writer) error, asJSON bool, v any, text func(io.Writer) error) error {
	if html != "" {
		if err := Write(cmd, html, writeHTML); err != nil {
			return err
		}
		if html == "-" {
			return nil
		}
		Info(cmd, "%s written to %s\n", what, html)
	}
	if asJSON {
		return JSON(cmd, v)
	}
	if html != "" && Quiet(cmd) {
		return nil
	}
	return text(cmd.OutOrStdout())
}
