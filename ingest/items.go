package ingest

import (
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/clipperhouse/uax29/v2/sentences"

	"handoff"
)

// ItemOptions maps the fields of a CSV or JSONL item file. Zero values mean
// the defaults.
type ItemOptions struct {
	IDField       string // default "id"; required in every record
	TextField     string // default "text"; required, non-empty
	ParentField   string // default "parent"; optional
	PositionField string // default "position"; optional, an integer ≥ 0
	PathField     string // default "path"; image tables only (NewImageTable)

	// Covariates lists the fields kept as covariates. nil means every field
	// that is not one of the above; an empty non-nil slice means none. A
	// listed covariate missing from a CSV header is an error. Empty values
	// are left out.
	Covariates []string

	// SplitSentences turns each record into one item per sentence (UAX #29
	// sentence boundaries, leading and trailing space trimmed, empty
	// sentences dropped). The sentence items get id "DOC#N", parent DOC (the
	// record's id) and position N (0-based), and the record's covariates; the
	// record's own parent field, if any, is kept as covariate "parent".
	SplitSentences bool
}

func (o *ItemOptions) defaults() {
	if o.IDField == "" {
		o.IDField = "id"
	}
	if o.TextField == "" {
		o.TextField = "text"
	}
	if o.ParentField == "" {
		o.ParentField = "parent"
	}
	if o.PositionField == "" {
		o.PositionField = "position"
	}
	if o.PathField == "" {
		o.PathField = "path"
	}
}

// ItemReader reads text items from a CSV or JSONL stream, one at a time.
type ItemReader struct {
	t       table
	opt     ItemOptions
	covSet  map[string]bool
	pending []handoff.Item
	loc     Location

	images  bool   // records list image files (NewImageTable)
	baseDir string // for relative image paths
	n       int    // records read
}

// NewItemReader reads items from r, a CSV or JSONL file called name (used
// in errors). For CSV the header is read and checked at once.
func NewItemReader(r io.Reader, name string, format Format, opt ItemOptions) (*ItemReader, error) {
	opt.defaults()
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, err
	}
	if err := requireColumns(t, opt.IDField, opt.TextField); err != nil {
		return nil, err
	}
	if opt.Covariates != nil {
		if err := requireColumns(t, opt.Covariates...); err != nil {
			return nil, err
		}
	}
	ir := &ItemReader{t: t, opt: opt, loc: t.where()}
	if opt.Covariates != nil {
		ir.covSet = map[string]bool{}
		for _, c := range opt.Covariates {
			ir.covSet[c] = true
		}
	}
	return ir, nil
}

// NewImageTable reads image items from a CSV or JSONL file called name
// that lists them with metadata: field "path" (opt.PathField; relative
// paths are taken from baseDir) is required; "id" defaults to the path as
// written; parent, position and covariates are read as for text items. Each
// image is decoded once and hashed, as NewImageFolder does.
func NewImageTable(r io.Reader, name string, format Format, baseDir string, opt ItemOptions) (*ItemReader, error) {
	opt.defaults()
	if opt.SplitSentences {
		return nil, fmt.Errorf("%s: images cannot be split into sentences", name)
	}
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, err
	}
	if err := requireColumns(t, opt.PathField); err != nil {
		return nil, err
	}
	if opt.Covariates != nil {
		if err := requireColumns(t, opt.Covariates...); err != nil {
			return nil, err
		}
	}
	ir := &ItemReader{t: t, opt: opt, loc: t.where(), images: true, baseDir: baseDir}
	if opt.Covariates != nil {
		ir.covSet = map[string]bool{}
		for _, c := range opt.Covariates {
			ir.covSet[c] = true
		}
	}
	return ir, nil
}

// Where returns the place of the record last read (for errors found later,
// e.g. a duplicate id found by the store).
func (ir *ItemReader) Where() Location { return ir.loc }

// Next returns the next item, or io.EOF at the end. Errors are *Error.
func (ir *ItemReader) Next() (handoff.Item, error) {
	for len(ir.pending) == 0 {
		rec, err := ir.t.next()
		if err != nil {
			if err != io.EOF {
				ir.loc = ir.t.where()
			} else if ir.n == 0 {
				return handoff.Item{}, emptyFile(ir.t.where().File, "items")
			}
			return handoff.Item{}, err
		}
		ir.n++
		ir.loc = rec.loc
		it, err := ir.item(rec)
		if err != nil {
			return handoff.Item{}, err
		}
		if !ir.opt.SplitSentences {
			return it, nil
		}
		ir.pending = splitItem(it)
		if len(ir.pending) == 0 {
			return handoff.Item{}, errf(rec.lineOf(ir.opt.TextField), ir.opt.TextField, "empty text")
		}
	}
	it := ir.pending[0]
	ir.pending = ir.pending[1:]
	return it, nil
}

func (ir *ItemReader) item(rec *record) (handoff.Item, error) {
	o := &ir.opt
	it := handoff.Item{Kind: handoff.KindText}
	if ir.images {
		p, ok := rec.get(o.PathField)
		if !ok {
			return it, errf(rec.loc, o.PathField, "missing image path")
		}
		p = strings.TrimSpace(p)
		if p == "" {
			return it, errf(rec.lineOf(o.PathField), o.PathField, "empty image path")
		}
		img, err := readImage(rec.lineOf(o.PathField), o.PathField, p, ir.baseDir)
		if err != nil {
			return it, err
		}
		it = img
		if id, ok := rec.get(o.IDField); ok {
			if strings.TrimSpace(id) == "" {
				return it, errf(rec.lineOf(o.IDField), o.IDField, "empty item id")
			}
			it.ID = id
		}
		if err := checkID(rec.lineOf(o.IDField), o.IDField, it.ID); err != nil {
			return it, err
		}
		return it, ir.meta(rec, &it)
	}
	id, ok := rec.get(o.IDField)
	if !ok {
		return it, errf(rec.loc, o.IDField, "missing item id")
	}
	if strings.TrimSpace(id) == "" {
		return it, errf(rec.lineOf(o.IDField), o.IDField, "empty item id")
	}
	if err := checkID(rec.lineOf(o.IDField), o.IDField, id); err != nil {
		return it, err
	}
	it.ID = id
	text, ok := rec.get(o.TextField)
	if !ok {
		return it, errf(rec.loc, o.TextField, "missing text")
	}
	if strings.TrimSpace(text) == "" {
		return it, errf(rec.lineOf(o.TextField), o.TextField, "empty text")
	}
	it.Text = text
	return it, ir.meta(rec, &it)
}

// meta fills an item's parent, position and covariates from rec.
func (ir *ItemReader) meta(rec *record, it *handoff.Item) error {
	o := &ir.opt
	if p, ok := rec.get(o.ParentField); ok {
		if err := checkID(rec.lineOf(o.ParentField), o.ParentField, p); err != nil {
			return err
		}
		it.Parent = p
	}
	if p, ok := rec.get(o.PositionField); ok && strings.TrimSpace(p) != "" {
		n, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || n < 0 {
			return errf(rec.lineOf(o.PositionField), o.PositionField, "position %q is not an integer ≥ 0", p)
		}
		it.Position = n
	}
	for i, name := range rec.names {
		if name == o.IDField || name == o.TextField || name == o.ParentField || name == o.PositionField ||
			(ir.images && name == o.PathField) {
			continue
		}
		if ir.covSet != nil && !ir.covSet[name] {
			continue
		}
		v := rec.values[i]
		if v == "" {
			continue
		}
		if err := handoff.CheckCovariate(v); err != nil {
			return errf(rec.lineOf(name), name, "%v", err)
		}
		if it.Covariates == nil {
			it.Covariates = map[string]string{}
		}
		it.Covariates[name] = v
	}
	return nil
}

// splitItem splits a text item into sentence items (see
// ItemOptions.SplitSentences).
func splitItem(doc handoff.Item) []handoff.Item {
	var out []handoff.Item
	cov := doc.Covariates
	if doc.Parent != "" {
		cov = make(map[string]string, len(doc.Covariates)+1)
		for k, v := range doc.Covariates {
			cov[k] = v
		}
		cov["parent"] = doc.Parent
	}
	for _, s := range SplitSentences(doc.Text) {
		pos := len(out)
		out = append(out, handoff.Item{
			ID:         doc.ID + "#" + strconv.Itoa(pos),
			Kind:       handoff.KindText,
			Text:       s,
			Parent:     doc.ID,
			Position:   pos,
			Covariates: cov,
		})
	}
	return out
}

// SplitSentences splits text at UAX #29 sentence boundaries, trims space
// around each sentence and drops empty ones.
func SplitSentences(text string) []string {
	var out []string
	it := sentences.FromString(text)
	for it.Next() {
		if s := strings.TrimSpace(it.Value()); s != "" {
			out = append(out, s)
		}
	}
	return out
}
