package ingest

import (
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"handoff"
)

// LabelOptions maps the fields of a long-format label file (one label per
// row). Zero values mean the defaults.
type LabelOptions struct {
	ItemField      string // default "item"; required
	AnnotatorField string // default "annotator"; required
	LabelField     string // default "label"; required: a class key
	TimeField      string // default "time"; optional, RFC 3339
	SecondsField   string // default "seconds"; optional, a finite number ≥ 0

	// Codebook, if set, lets the reader refuse labels that are not class
	// keys as soon as it reads them. (The store checks again on write.)
	Codebook *handoff.Codebook
}

func (o *LabelOptions) defaults() {
	if o.ItemField == "" {
		o.ItemField = "item"
	}
	if o.AnnotatorField == "" {
		o.AnnotatorField = "annotator"
	}
	if o.LabelField == "" {
		o.LabelField = "label"
	}
	if o.TimeField == "" {
		o.TimeField = "time"
	}
	if o.SecondsField == "" {
		o.SecondsField = "seconds"
	}
}

// LabelReader reads crowd labels from a CSV or JSONL stream, one at a time.
type LabelReader struct {
	t   table
	opt LabelOptions
	loc Location
	n   int // records read
}

// NewLabelReader reads labels from r, a CSV or JSONL file called name.
func NewLabelReader(r io.Reader, name string, format Format, opt LabelOptions) (*LabelReader, error) {
	opt.defaults()
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, err
	}
	if err := requireColumns(t, opt.ItemField, opt.AnnotatorField, opt.LabelField); err != nil {
		return nil, err
	}
	return &LabelReader{t: t, opt: opt, loc: t.where()}, nil
}

// Where returns the place of the record last read.
func (lr *LabelReader) Where() Location { return lr.loc }

// Next returns the next label, or io.EOF at the end. Errors are *Error.
func (lr *LabelReader) Next() (handoff.Label, error) {
	var l handoff.Label
	rec, err := lr.t.next()
	if err != nil {
		if err != io.EOF {
			lr.loc = lr.t.where()
		} else if lr.n == 0 {
			return l, emptyFile(lr.t.where().File, "labels")
		}
		return l, err
	}
	lr.n++
	lr.loc = rec.loc
	o := &lr.opt
	if l.Item, err = requiredID(rec, o.ItemField); err != nil {
		return l, err
	}
	if l.Annotator, err = requiredID(rec, o.AnnotatorField); err != nil {
		return l, err
	}
	if l.Class, err = classOf(rec, o.LabelField, o.Codebook); err != nil {
		return l, err
	}
	if v, ok := rec.get(o.TimeField); ok && strings.TrimSpace(v) != "" {
		t, err := time.Parse(time.RFC3339Nano, strings.TrimSpace(v))
		if err != nil {
			return l, errf(rec.lineOf(o.TimeField), o.TimeField, "time %q is not RFC 3339 (e.g. 2024-05-01T14:03:00Z)", v)
		}
		l.Time = t
	}
	if v, ok := rec.get(o.SecondsField); ok && strings.TrimSpace(v) != "" {
		f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) || f < 0 {
			return l, errf(rec.lineOf(o.SecondsField), o.SecondsField, "seconds %q is not a finite number ≥ 0", v)
		}
		l.Seconds = f
	}
	return l, nil
}

func required(rec *record, field string) (string, error) {
	v, ok := rec.get(field)
	if !ok {
		return "", errf(rec.loc, field, "missing %s", field)
	}
	v = strings.TrimSpace(v)
	if v == "" {
		return "", errf(rec.lineOf(field), field, "empty %s", field)
	}
	return v, nil
}

// requiredID is required for an identifier: it must also be printable
// (see checkID).
func requiredID(rec *record, field string) (string, error) {
	v, err := required(rec, field)
	if err != nil {
		return "", err
	}
	if err := checkID(rec.lineOf(field), field, v); err != nil {
		return "", err
	}
	return v, nil
}

func classOf(rec *record, field string, cb *handoff.Codebook) (string, error) {
	v, err := required(rec, field)
	if err != nil {
		return "", err
	}
	if cb != nil {
		if _, ok := cb.Index(v); !ok {
			return "", errf(rec.lineOf(field), field, "label %q is not in the codebook (classes: %s)", v, strings.Join(cb.Keys(), ", "))
		}
	}
	return v, nil
}

// GoldOptions maps the fields of a gold file. Zero values mean the defaults.
type GoldOptions struct {
	ItemField   string // default "item"; required
	LabelField  string // default "label"; required: a class key
	SourceField string // default "source"; optional; if absent or empty the file's base name

	Codebook *handoff.Codebook // as in LabelOptions
}

// GoldReader reads gold answers from a CSV or JSONL stream.
type GoldReader struct {
	t    table
	opt  GoldOptions
	loc  Location
	base string
	n    int // records read
}

// NewGoldReader reads gold answers from r, a CSV or JSONL file called name.
func NewGoldReader(r io.Reader, name string, format Format, opt GoldOptions) (*GoldReader, error) {
	if opt.ItemField == "" {
		opt.ItemField = "item"
	}
	if opt.LabelField == "" {
		opt.LabelField = "label"
	}
	if opt.SourceField == "" {
		opt.SourceField = "source"
	}
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, err
	}
	if err := requireColumns(t, opt.ItemField, opt.LabelField); err != nil {
		return nil, err
	}
	return &GoldReader{t: t, opt: opt, loc: t.where(), base: filepath.Base(name)}, nil
}

// Where returns the place of the record last read.
func (gr *GoldReader) Where() Location { return gr.loc }

// Next returns the next gold answer, or io.EOF at the end.
func (gr *GoldReader) Next() (handoff.Gold, error) {
	var g handoff.Gold
	rec, err := gr.t.next()
	if err != nil {
		if err != io.EOF {
			gr.loc = gr.t.where()
		} else if gr.n == 0 {
			return g, emptyFile(gr.t.where().File, "gold answers")
		}
		return g, err
	}
	gr.n++
	gr.loc = rec.loc
	if g.Item, err = requiredID(rec, gr.opt.ItemField); err != nil {
		return g, err
	}
	if g.Class, err = classOf(rec, gr.opt.LabelField, gr.opt.Codebook); err != nil {
		return g, err
	}
	g.Source = gr.base
	if v, ok := rec.get(gr.opt.SourceField); ok && strings.TrimSpace(v) != "" {
		g.Source = strings.TrimSpace(v)
	}
	return g, nil
}
