// Package ingest reads the files people bring to a project — codebooks,
// items (CSV, JSONL, image folders and lists), crowd labels and gold answers —
// into the domain types of package handoff. It is used by cmd/loop and the
// HTTP API alike and knows nothing of the store.
//
// Readers stream: they hold one record at a time, so files of any size can
// be read. Every problem with the input comes back as an *Error naming the
// file, the line and the field, e.g.
//
//	items.csv:17: field "text": empty text
//
// Size: about 1,650 lines for the codebook (YAML and JSON, question trees),
// items (CSV, JSONL, sentences, image folders, lists and tables), labels
// and gold, each reader naming the file, line and field of a bad record.
package ingest

import (
	"errors"
	"fmt"
)

// MaxField is the largest field accepted, in bytes (1 MB).
const MaxField = 1 << 20

// Error is a problem with the input at a place in a file. Line is 1-based;
// 0 means the file as a whole. Field is "" when the problem is not in one
// field (for example malformed CSV).
type Error struct {
	File  string
	Line  int
	Field string
	Err   error
}

func (e *Error) Error() string {
	s := e.File
	if e.Line > 0 {
		s += fmt.Sprintf(":%d", e.Line)
	}
	if e.Field != "" {
		s += fmt.Sprintf(": field %q", e.Field)
	}
	return s + ": " + e.Err.Error()
}

func (e *Error) Unwrap() error { return e.Err }

// At returns an *Error at loc (as given by a reader's Where) for field.
// If err is already an *Error it is returned unchanged.
func At(loc Location, field string, err error) error {
	var e *Error
	if errors.As(err, &e) {
		return err
	}
	return &Error{File: loc.File, Line: loc.Line, Field: field, Err: err}
}

// Location is a place in an input file.
type Location struct {
	File string
	Line int
}

func errf(loc Location, field, format string, a ...any) *Error {
	return &Error{File: loc.File, Line: loc.Line, Field: field, Err: fmt.Errorf(format, a...)}
}

// emptyFile is the error of a file that holds no records of the kind
// expected ("items", "labels", "gold answers").
func emptyFile(name, what string) *Error {
	return errf(Location{File: name}, "", "no %s in the file (a header row alone is not enough): add at least one or leave the file out", what)
}
