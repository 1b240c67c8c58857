package ingest

import (
	"errors"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"handoff"
)

// ReadReference reads a whole reference coding (an independent coding by
// experts or an earlier study) from r, a CSV or JSONL file called name, and
// checks it against the codebook (handoff.Reference.Validate). The file
// holds either item labels — fields item and label (a class key) — or
// parent scores — fields parent, value and optionally question (a class
// key: the value is that class's share, 0–1; or "position": the mean
// position on an ordinal codebook, 1–K; empty means position). A CSV
// header with both item and parent columns, or a JSONL file that mixes the
// two kinds, is an error.
//
// It returns the reference named refName with Source the file's base name,
// and where each row was read (locs[i] for row i of Items or Parents), so
// that a later check (the store's: does the item exist?) can be reported
// at its line. Every error is an *Error naming the file, line and field.
// References are small (one row per coded item or parent), so the whole
// file is held in memory.
func ReadReference(r io.Reader, name string, format Format, refName string, cb handoff.Codebook) (*handoff.Reference, []Location, error) {
	t, err := newTable(r, name, format)
	if err != nil {
		return nil, nil, err
	}
	ref := &handoff.Reference{Name: refName, Source: filepath.Base(name)}
	var locs []Location
	kind := handoff.ReferenceKind("")
	if cols := t.columns(); cols != nil {
		has := map[string]bool{}
		for _, c := range cols {
			has[c] = true
		}
		switch {
		case has["item"] && has["parent"]:
			return nil, nil, errf(Location{File: name, Line: 1}, "", "the header has both item and parent columns: a reference holds item labels (item, label) or parent scores (parent, value, question), not both")
		case has["item"]:
			kind = handoff.ReferenceItems
			if err := requireColumns(t, "item", "label"); err != nil {
				return nil, nil, err
			}
		case has["parent"]:
			kind = handoff.ReferenceParents
			if err := requireColumns(t, "parent", "value"); err != nil {
				return nil, nil, err
			}
		default:
			return nil, nil, errf(Location{File: name, Line: 1}, "", "no item or parent column (columns: %s): give item and label, or parent, value and optionally question", strings.Join(cols, ", "))
		}
	}
	for {
		rec, err := t.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, nil, err
		}
		k := kind
		if _, ok := rec.get("item"); ok {
			k = handoff.ReferenceItems
		} else if _, ok := rec.get("parent"); ok {
			k = handoff.ReferenceParents
		}
		switch {
		case k == "":
			return nil, nil, errf(rec.loc, "", "no item or parent field: give item and label, or parent, value and optionally question")
		case kind == "":
			kind = k
		case k != kind:
			return nil, nil, errf(rec.loc, "", "this row holds a %s field but the rows before hold %s: a reference holds item labels or parent scores, not both", fieldOf(k), fieldOf(kind))
		}
		if kind == handoff.ReferenceItems {
			var l handoff.ReferenceLabel
			if l.Item, err = requiredID(rec, "item"); err != nil {
				return nil, nil, err
			}
			if l.Class, err = classOf(rec, "label", &cb); err != nil {
				return nil, nil, err
			}
			ref.Items = append(ref.Items, l)
		} else {
			var s handoff.ReferenceScore
			if s.Parent, err = requiredID(rec, "parent"); err != nil {
				return nil, nil, err
			}
			v, err := required(rec, "value")
			if err != nil {
				return nil, nil, err
			}
			f, perr := strconv.ParseFloat(v, 64)
			if perr != nil || math.IsNaN(f) || math.IsInf(f, 0) {
				return nil, nil, errf(rec.lineOf("value"), "value", "value %q is not a finite number", v)
			}
			s.Value = f
			if q, ok := rec.get("question"); ok {
				s.Question = strings.TrimSpace(q)
			}
			ref.Parents = append(ref.Parents, s)
		}
		locs = append(locs, rec.loc)
	}
	if ref.Len() == 0 {
		return nil, nil, emptyFile(name, "reference rows")
	}
	if err := ref.Validate(cb); err != nil {
		var re *handoff.RowError
		if errors.As(err, &re) {
			return nil, nil, RowAt(locs, re)
		}
		return nil, nil, &Error{File: name, Err: err}
	}
	return ref, locs, nil
}

// RowAt places a reference's row error at the row's line.
func RowAt(locs []Location, re *handoff.RowError) error {
	loc := Location{}
	if re.Row >= 0 && re.Row < len(locs) {
		loc = locs[re.Row]
	}
	return &Error{File: loc.File, Line: loc.Line, Field: re.Field, Err: re.Err}
}

func fieldOf(k handoff.ReferenceKind) string {
	if k == handoff.ReferenceParents {
		return "parent"
	}
	return "item"
}
