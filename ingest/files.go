package ingest

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"handoff"
)

// Source is one input to read: a file (or, for Images, a folder) and its
// format.
type Source struct {
	Path   string
	Format Format
}

// ErrSource is wrapped by the errors of ItemSources and LabelSources that
// are mistakes in how the files were named (a format that cannot be told
// or does not fit); a file that cannot be read gives its own error.
var ErrSource = errors.New("bad input file")

// ItemSources checks item files (or image folders) and their format:
// format, when not "", applies to all; otherwise each one's is guessed from
// its name. split says the texts will be split into sentences, which
// images cannot be.
func ItemSources(paths []string, format Format, split bool) ([]Source, error) {
	srcs := make([]Source, 0, len(paths))
	for _, f := range paths {
		fi, err := os.Stat(f)
		if err != nil {
			return nil, err
		}
		ff := format
		if ff == "" {
			ff = GuessFormat(f, fi.IsDir())
		}
		switch {
		case ff == "":
			return nil, fmt.Errorf("%w: cannot tell the format of %s from its name; use --format csv|jsonl|images", ErrSource, f)
		case ff != CSV && ff != JSONL && ff != Images:
			return nil, fmt.Errorf("%w: --format %q: want csv, jsonl or images", ErrSource, format)
		case fi.IsDir() && ff != Images:
			return nil, fmt.Errorf("%w: %s is a folder; only --format images reads folders", ErrSource, f)
		case ff == Images && split:
			return nil, fmt.Errorf("%w: --split applies to text, not images (%s)", ErrSource, f)
		}
		srcs = append(srcs, Source{Path: f, Format: ff})
	}
	return srcs, nil
}

// LabelSources checks label or gold files and their format (CSV or JSONL:
// format, or guessed from each name).
func LabelSources(paths []string, format Format) ([]Source, error) {
	srcs := make([]Source, 0, len(paths))
	for _, f := range paths {
		ff := format
		if ff == "" {
			ff = GuessFormat(f, false)
		}
		if ff != CSV && ff != JSONL {
			return nil, fmt.Errorf("%w: cannot read labels from %s: use a .csv or .jsonl file, or --format csv|jsonl", ErrSource, f)
		}
		srcs = append(srcs, Source{Path: f, Format: ff})
	}
	return srcs, nil
}

// Reader is what every record reader of this package offers: the next
// record (io.EOF at the end) and the place of the record last read.
type Reader[T any] interface {
	Next() (T, error)
	Where() Location
}

// Files reads the records of several sources in turn as one stream, so
// that one store transaction can take them all: Next opens each source
// when the one before is done and returns io.EOF after the last. Set Open
// and Folder before the first Next; Close when done (also after an error).
type Files[T any] struct {
	// Open opens a file for reading; nil means os.Open. (The command line
	// passes one that draws a progress bar.)
	Open func(path string) (io.ReadCloser, error)
	// Folder, when not nil, is called as a folder of n images starts; tick
	// is then called once per image read from it and done when it ends.
	Folder func(path string, n int) (tick, done func())

	srcs []Source
	open func(src Source, r io.Reader) (Reader[T], error)
	i    int
	cur  Reader[T]
	file io.Closer
	tick func()
	done func()
	last *Location // the place of the record last read, once a source has ended
}

// ItemFiles reads text items (CSV, JSONL) or images (a folder, a list of
// paths, or with format Images a CSV or JSONL table with a path field)
// from the sources, as NewItemReader, NewImageFolder, NewImageList and
// NewImageTable do; image paths are relative to the folder of the file
// that names them.
func ItemFiles(srcs []Source, opt ItemOptions) *Files[handoff.Item] {
	return &Files[handoff.Item]{srcs: srcs, open: func(src Source, r io.Reader) (Reader[handoff.Item], error) {
		if src.Format != Images {
			return NewItemReader(r, src.Path, src.Format, opt)
		}
		if tf := GuessFormat(src.Path, false); tf == CSV || tf == JSONL {
			return NewImageTable(r, src.Path, tf, filepath.Dir(src.Path), opt)
		}
		return NewImageList(r, src.Path, filepath.Dir(src.Path)), nil
	}}
}

// LabelFiles reads crowd labels from the sources (CSV or JSONL), as
// NewLabelReader does.
func LabelFiles(srcs []Source, opt LabelOptions) *Files[handoff.Label] {
	return &Files[handoff.Label]{srcs: srcs, open: func(src Source, r io.Reader) (Reader[handoff.Label], error) {
		return NewLabelReader(r, src.Path, src.Format, opt)
	}}
}

// GoldFiles reads gold answers from the sources (CSV or JSONL), as
// NewGoldReader does.
func GoldFiles(srcs []Source, opt GoldOptions) *Files[handoff.Gold] {
	return &Files[handoff.Gold]{srcs: srcs, open: func(src Source, r io.Reader) (Reader[handoff.Gold], error) {
		return NewGoldReader(r, src.Path, src.Format, opt)
	}}
}

// Next returns the next record of the current source, moving on to the
// next source at the end of one, or io.EOF after the last. Errors are
// *Error where a place is known.
func (f *Files[T]) Next() (T, error) {
	for {
		if f.cur == nil {
			if f.i >= len(f.srcs) {
				var zero T
				return zero, io.EOF
			}
			if err := f.start(f.srcs[f.i]); err != nil {
				var zero T
				return zero, err
			}
			f.i++
		}
		x, err := f.cur.Next()
		if err == io.EOF {
			f.Close()
			continue
		}
		if err == nil && f.tick != nil {
			f.tick()
		}
		return x, err
	}
}

// start opens one source.
func (f *Files[T]) start(src Source) error {
	if src.Format == Images {
		if fi, err := os.Stat(src.Path); err == nil && fi.IsDir() {
			ir, err := NewImageFolder(src.Path)
			if err != nil {
				return err
			}
			cur, ok := any(ir).(Reader[T])
			if !ok {
				return fmt.Errorf("%s is a folder of images; it holds no %T records", src.Path, *new(T))
			}
			if f.Folder != nil {
				f.tick, f.done = f.Folder(src.Path, ir.Len())
			}
			f.cur = cur
			return nil
		}
	}
	open := f.Open
	if open == nil {
		open = func(p string) (io.ReadCloser, error) { return os.Open(p) }
	}
	r, err := open(src.Path)
	if err != nil {
		return err
	}
	cur, err := f.open(src, r)
	if err != nil {
		r.Close()
		return err
	}
	f.cur, f.file = cur, r
	return nil
}

// Where returns the place of the record last read (the store checks some
// records only once they are all read), and false before any source was
// opened.
func (f *Files[T]) Where() (Location, bool) {
	switch {
	case f.cur != nil:
		return f.cur.Where(), true
	case f.last != nil:
		return *f.last, true
	}
	return Location{}, false
}

// Close closes the source being read, if any. Next goes on with the next
// source.
func (f *Files[T]) Close() error {
	var err error
	if f.cur != nil {
		loc := f.cur.Where()
		f.last = &loc
	}
	if f.file != nil {
		err = f.file.Close()
	}
	if f.done != nil {
		f.done()
	}
	f.cur, f.file, f.tick, f.done = nil, nil, nil, nil
	return err
}
