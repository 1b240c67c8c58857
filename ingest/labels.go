package ingest

import (
	"errors"
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
	// QuestionField (default "question"; optional) is the key of the
	// question a label answers; empty or absent means the first question.
	QuestionField string

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
	if o.QuestionField == "" {
		o.QuestionField = "question"
	}
}

// LabelReader reads crowd labels from a CSV or JSONL stream, one at a time.
//
// Long format: one label per record (item, annotator, label, and
// optionally question, time, seconds). Wide format, for a codebook with
// follow-up questions: a record without a label field whose other fields
// are named by question keys (item, annotator, topic, severity, and
// optionally time) gives one label per non-empty question field; an empty
// field means the question was not answered. A wide record cannot carry
// seconds (one duration for several answers).
type LabelReader struct {
	t       table
	opt     LabelOptions
	loc     Location
	n       int // records read
	pending []handoff.Label
}

// NewLabelReader reads labels from r, a CSV or JSONL file called name.
func NewLabelReader(r io.Reader, name string, format Format, opt LabelOptions) (*LabelReader, error) {
	opt.defaults()
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, err
	}
	need := []string{opt.ItemField, opt.AnnotatorField, opt.LabelField}
	if cols := t.columns(); cols != nil && wideColumns(cols, opt) {
		need = need[:2]
	}
	if err := requireColumns(t, need...); err != nil {
		return nil, err
	}
	return &LabelReader{t: t, opt: opt, loc: t.where()}, nil
}

// Where returns the place of the record last read.
func (lr *LabelReader) Where() Location { return lr.loc }

// wideColumns reports whether a header (CSV) names no label column and at
// least one question of a tree codebook: a wide file.
func wideColumns(cols []string, o LabelOptions) bool {
	if o.Codebook == nil || !o.Codebook.Tree() {
		return false
	}
	wide := false
	for _, c := range cols {
		if c == o.LabelField {
			return false
		}
		if _, ok := o.Codebook.QuestionIndex(c); ok && c != "" {
			wide = true
		}
	}
	return wide
}

// Next returns the next label, or io.EOF at the end. Errors are *Error.
func (lr *LabelReader) Next() (handoff.Label, error) {
	for len(lr.pending) == 0 {
		l, wide, err := lr.next()
		if err != nil || !wide {
			return l, err
		}
	}
	l := lr.pending[0]
	lr.pending = lr.pending[1:]
	return l, nil
}

// next reads one record: a long one's label, or (wide) the record's labels
// into lr.pending.
func (lr *LabelReader) next() (handoff.Label, bool, error) {
	l, err := lr.read()
	if err == errWide {
		return l, true, nil
	}
	return l, false, err
}

var errWide = errors.New("wide record")

func (lr *LabelReader) read() (handoff.Label, error) {
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
	if _, ok := rec.get(o.LabelField); !ok && o.Codebook != nil && o.Codebook.Tree() {
		return l, lr.wide(rec, l)
	}
	if q, ok := rec.get(o.QuestionField); ok {
		l.Question = strings.TrimSpace(q)
		if l.Question != "" && o.Codebook != nil {
			if _, ok := o.Codebook.QuestionIndex(l.Question); !ok {
				return l, errf(rec.lineOf(o.QuestionField), o.QuestionField, "question %q is not in the codebook (questions: %s)", l.Question, strings.Join(questionKeys(o.Codebook), ", "))
			}
		}
	}
	if l.Class, err = answerOf(rec, o.LabelField, o.Codebook, l.Question); err != nil {
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

// wide reads a wide record (item and annotator already in l) into
// lr.pending and returns errWide.
func (lr *LabelReader) wide(rec *record, l handoff.Label) error {
	o := &lr.opt
	if v, ok := rec.get(o.SecondsField); ok && strings.TrimSpace(v) != "" {
		return errf(rec.lineOf(o.SecondsField), o.SecondsField, "a wide file (one column per question) cannot carry seconds, which would count once per answer: leave the column out or use the long format (one label per line, with a question column)")
	}
	if v, ok := rec.get(o.TimeField); ok && strings.TrimSpace(v) != "" {
		t, err := time.Parse(time.RFC3339Nano, strings.TrimSpace(v))
		if err != nil {
			return errf(rec.lineOf(o.TimeField), o.TimeField, "time %q is not RFC 3339 (e.g. 2024-05-01T14:03:00Z)", v)
		}
		l.Time = t
	}
	cb := o.Codebook
	any := false
	for q, x := range cb.All() {
		v, ok := rec.get(x.Key)
		if !ok {
			continue
		}
		any = true
		if v = strings.TrimSpace(v); v == "" {
			continue
		}
		sub := cb.Sub(q)
		if _, ok := sub.Index(v); !ok {
			return errf(rec.lineOf(x.Key), x.Key, "label %q is not a class of question %q (classes: %s)", v, x.Key, strings.Join(sub.Keys(), ", "))
		}
		a := l
		if q > 0 {
			a.Question = x.Key
		}
		a.Class = v
		lr.pending = append(lr.pending, a)
	}
	if !any {
		return errf(rec.loc, o.LabelField, "missing %s: give a %s field, or (wide format) fields named by question keys (%s)", o.LabelField, o.LabelField, strings.Join(questionKeys(cb), ", "))
	}
	return errWide
}

func questionKeys(cb *handoff.Codebook) []string {
	var ks []string
	for _, q := range cb.All() {
		ks = append(ks, q.Key)
	}
	return ks
}

// answerOf reads the class of a label answering question (a key, "" the
// first question) and checks it against that question's classes.
func answerOf(rec *record, field string, cb *handoff.Codebook, question string) (string, error) {
	if cb == nil || question == "" {
		return classOf(rec, field, cb)
	}
	q, _ := cb.QuestionIndex(question)
	sub := cb.Sub(q)
	v, err := classOf(rec, field, nil)
	if err != nil {
		return "", err
	}
	if _, ok := sub.Index(v); !ok {
		return "", errf(rec.lineOf(field), field, "label %q is not a class of question %q (classes: %s)", v, question, strings.Join(sub.Keys(), ", "))
	}
	return v, nil
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
