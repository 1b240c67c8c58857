package ingest

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"sort"
	"strings"
	"unicode/utf8"
)

// Format names an input file format.
type Format string

// The input formats.
const (
	CSV    Format = "csv"    // comma-separated, first row is the header
	JSONL  Format = "jsonl"  // one JSON object per line
	Images Format = "images" // an image folder, or a list of image paths one per line
)

// GuessFormat guesses a file's format from its name: .csv → CSV; .jsonl,
// .ndjson, .json → JSONL; .txt, .list and folders (isDir) → Images. It
// returns "" when it cannot tell.
func GuessFormat(name string, isDir bool) Format {
	if isDir {
		return Images
	}
	lower := strings.ToLower(name)
	switch {
	case strings.HasSuffix(lower, ".csv"):
		return CSV
	case strings.HasSuffix(lower, ".jsonl"), strings.HasSuffix(lower, ".ndjson"), strings.HasSuffix(lower, ".json"):
		return JSONL
	case strings.HasSuffix(lower, ".txt"), strings.HasSuffix(lower, ".list"):
		return Images
	}
	return ""
}

// maxLine bounds one JSONL line (many fields of up to MaxField each).
const maxLine = 16 << 20

// record is one row of a CSV or JSONL file: field names with values.
// Missing means the field is absent (JSON null or no such key).
type record struct {
	loc    Location
	names  []string
	values []string
	lines  []int // line of each field (CSV quoted fields may span lines)
}

func (r *record) get(name string) (string, bool) {
	for i, n := range r.names {
		if n == name {
			return r.values[i], true
		}
	}
	return "", false
}

func (r *record) lineOf(name string) Location {
	for i, n := range r.names {
		if n == name && r.lines != nil {
			return Location{File: r.loc.File, Line: r.lines[i]}
		}
	}
	return r.loc
}

// table reads records from a CSV or JSONL stream.
type table interface {
	next() (*record, error) // io.EOF at the end
	// columns returns the header for CSV, nil for JSONL (whose fields vary
	// per line).
	columns() []string
	where() Location
}

func newTable(r io.Reader, name string, f Format) (table, error) {
	switch f {
	case CSV:
		return newCSVTable(r, name)
	case JSONL:
		return &jsonlTable{r: bufio.NewReaderSize(r, 1<<16), name: name}, nil
	}
	return nil, fmt.Errorf("%s: format %q is not csv or jsonl", name, f)
}

// requireColumns checks a CSV header for required columns (JSONL checks per
// record).
func requireColumns(t table, names ...string) error {
	cols := t.columns()
	if cols == nil {
		return nil
	}
	for _, n := range names {
		found := false
		for _, c := range cols {
			if c == n {
				found = true
			}
		}
		if !found {
			return errf(Location{File: t.where().File, Line: 1}, n, "missing required column %q (columns: %s)", n, strings.Join(cols, ", "))
		}
	}
	return nil
}

type csvTable struct {
	r      *csv.Reader
	name   string
	header []string
	loc    Location
}

func newCSVTable(r io.Reader, name string) (*csvTable, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	t := &csvTable{r: cr, name: name, loc: Location{File: name, Line: 1}}
	h, err := cr.Read()
	if err == io.EOF {
		return nil, errf(t.loc, "", "empty file: no header row")
	}
	if err != nil {
		return nil, csvError(name, err)
	}
	t.header = make([]string, len(h))
	seen := map[string]bool{}
	for i, c := range h {
		if i == 0 {
			c = strings.TrimPrefix(c, "\ufeff")
		}
		c = strings.TrimSpace(c)
		if !utf8.ValidString(c) {
			return nil, errf(t.loc, "", "column %d: header is not UTF-8 text", i+1)
		}
		if c == "" {
			return nil, errf(t.loc, "", "column %d has an empty name", i+1)
		}
		if seen[c] {
			return nil, errf(t.loc, c, "column %q appears twice in the header", c)
		}
		seen[c] = true
		t.header[i] = c
	}
	return t, nil
}

func csvError(name string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &Error{File: name, Line: pe.Line, Err: fmt.Errorf("malformed CSV: %v", pe.Err)}
	}
	return &Error{File: name, Err: err}
}

func (t *csvTable) columns() []string { return t.header }
func (t *csvTable) where() Location   { return t.loc }

func (t *csvTable) next() (*record, error) {
	row, err := t.r.Read()
	if err == io.EOF {
		return nil, io.EOF
	}
	if err != nil {
		return nil, csvError(t.name, err)
	}
	line, _ := t.r.FieldPos(0)
	t.loc = Location{File: t.name, Line: line}
	rec := &record{loc: t.loc, names: t.header, values: make([]string, len(row)), lines: make([]int, len(row))}
	for i, v := range row {
		l, _ := t.r.FieldPos(i)
		rec.lines[i] = l
		if len(v) > MaxField {
			return nil, errf(Location{File: t.name, Line: l}, t.header[i], "field over 1 MB (%d bytes)", len(v))
		}
		if !utf8.ValidString(v) {
			return nil, errf(Location{File: t.name, Line: l}, t.header[i], "not UTF-8 text")
		}
		if err := checkNUL(Location{File: t.name, Line: l}, t.header[i], v); err != nil {
			return nil, err
		}
		rec.values[i] = v
	}
	return rec, nil
}

type jsonlTable struct {
	r    *bufio.Reader
	name string
	line int
	buf  []byte
}

func (t *jsonlTable) columns() []string { return nil }
func (t *jsonlTable) where() Location   { return Location{File: t.name, Line: t.line} }

// readLine reads one line (without the newline) of at most maxLine bytes.
func (t *jsonlTable) readLine() ([]byte, error) {
	t.buf = t.buf[:0]
	for {
		chunk, err := t.r.ReadSlice('\n')
		t.buf = append(t.buf, chunk...)
		if len(t.buf) > maxLine {
			return nil, errf(t.where(), "", "line longer than %d MB", maxLine>>20)
		}
		if err == bufio.ErrBufferFull {
			continue
		}
		if err == io.EOF {
			if len(t.buf) == 0 {
				return nil, io.EOF
			}
			return t.buf, nil
		}
		if err != nil {
			return nil, &Error{File: t.name, Line: t.line, Err: err}
		}
		return bytes.TrimSuffix(t.buf[:len(t.buf)-1], []byte("\r")), nil
	}
}

func (t *jsonlTable) next() (*record, error) {
	for {
		t.line++
		line, err := t.readLine()
		if err != nil {
			return nil, err
		}
		if len(bytes.TrimSpace(line)) == 0 {
			continue
		}
		return t.parse(line)
	}
}

func (t *jsonlTable) parse(line []byte) (*record, error) {
	loc := t.where()
	var obj map[string]json.RawMessage
	if err := json.Unmarshal(line, &obj); err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			return nil, errf(loc, "", "malformed JSON at byte %d: %v", se.Offset, err)
		}
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return nil, errf(loc, "", "malformed JSON: each line must be one JSON object")
		}
		return nil, errf(loc, "", "malformed JSON: %v", err)
	}
	if obj == nil {
		return nil, errf(loc, "", "malformed JSON: each line must be one JSON object, not null")
	}
	rec := &record{loc: loc, names: make([]string, 0, len(obj)), values: make([]string, 0, len(obj))}
	for k := range obj {
		rec.names = append(rec.names, k)
	}
	sort.Strings(rec.names)
	for _, k := range rec.names {
		raw := obj[k]
		if !utf8.ValidString(k) {
			return nil, errf(loc, "", "a field name is not UTF-8 text")
		}
		if !utf8.Valid(raw) {
			return nil, errf(loc, k, "not UTF-8 text")
		}
		v, present, err := scalar(raw)
		if err != nil {
			return nil, errf(loc, k, "%v", err)
		}
		if len(v) > MaxField {
			return nil, errf(loc, k, "field over 1 MB (%d bytes)", len(v))
		}
		if !utf8.ValidString(v) {
			// \ud800-style escapes decode to U+FFFD, but be safe.
			return nil, errf(loc, k, "not UTF-8 text")
		}
		if !present {
			continue
		}
		if err := checkNUL(loc, k, v); err != nil {
			return nil, err
		}
		rec.values = append(rec.values, v)
	}
	// Drop names of absent (null) fields so names and values line up.
	if len(rec.values) != len(rec.names) {
		names := rec.names[:0]
		for _, k := range rec.names {
			if _, present, _ := scalar(obj[k]); present {
				names = append(names, k)
			}
		}
		rec.names = names
	}
	return rec, nil
}

// scalar turns a JSON value into a string: strings as they are, numbers as
// written, booleans as "true"/"false". null is absent. Objects and arrays
// are errors.
func scalar(raw json.RawMessage) (string, bool, error) {
	raw = bytes.TrimSpace(raw)
	if len(raw) == 0 {
		return "", false, errors.New("empty value")
	}
	switch raw[0] {
	case '"':
		if len(raw) >= 2 && raw[len(raw)-1] == '"' && bytes.IndexByte(raw, '\\') < 0 {
			// No escapes: the text between the quotes is the value.
			// (Control characters are refused by the outer decode.)
			return string(raw[1 : len(raw)-1]), true, nil
		}
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return "", false, err
		}
		return s, true, nil
	case 'n':
		return "", false, nil
	case 't', 'f':
		return string(raw), true, nil
	case '{', '[':
		return "", false, errors.New("must be a string, number or boolean, not an object or array")
	default:
		var n json.Number
		if err := json.Unmarshal(raw, &n); err != nil {
			return "", false, err
		}
		return n.String(), true, nil
	}
}
