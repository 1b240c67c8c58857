package handoff

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
	"unicode"
)

// Reference is an independent coding of the project's items or parents,
// by experts or by an earlier study, kept apart from gold: it is never used
// for screening, cleaning, training, the verdict's decision or next
// batches, and never shown to annotators. It serves to compare the crowd
// and the machine with it (validity).
//
// Rules: Name is 1–64 characters of letters, digits, '.', '_' and '-'. A
// reference holds either Items (item-level labels) or Parents (parent-level
// scores), not both, and at least one row; an item, or a parent with a
// question, appears at most once. Source says where it came from (a file
// name); Added when it was added.
type Reference struct {
	Name    string           `json:"name"`
	Source  string           `json:"source,omitempty"`
	Added   time.Time        `json:"added,omitzero"`
	Items   []ReferenceLabel `json:"items,omitempty"`
	Parents []ReferenceScore `json:"parents,omitempty"`
}

// ReferenceLabel is a reference's class for one item: a key of the
// project's codebook.
type ReferenceLabel struct {
	Item  string `json:"item"`
	Class string `json:"label"`
}

// ReferenceScore is a reference's score for one parent. Question says what
// the value measures: a class key (Value is that class's share of the
// parent's items, in [0, 1]) or "position" (the mean position on an
// ordinal codebook, in [1, K], 1 the lowest class); "" means "position".
type ReferenceScore struct {
	Parent   string  `json:"parent"`
	Value    float64 `json:"value"`
	Question string  `json:"question,omitempty"`
}

// PositionQuestion is the question of a parent score that gives a mean
// position on an ordinal codebook.
const PositionQuestion = "position"

// ReferenceKind names what a reference codes.
type ReferenceKind string

// The kinds of reference.
const (
	ReferenceItems   ReferenceKind = "items"   // item labels
	ReferenceParents ReferenceKind = "parents" // parent scores
)

// Kind says whether the reference codes items or parents.
func (r *Reference) Kind() ReferenceKind {
	if len(r.Parents) > 0 {
		return ReferenceParents
	}
	return ReferenceItems
}

// Len is the number of rows.
func (r *Reference) Len() int { return len(r.Items) + len(r.Parents) }

// CheckReferenceName says what is wrong with a reference name, if anything.
func CheckReferenceName(name string) error {
	if name == "" {
		return errors.New("name: empty reference name (give one with --name, e.g. experts-2019)")
	}
	if len(name) > 64 {
		return fmt.Errorf("name: %q is longer than 64 characters", name)
	}
	for _, r := range name {
		if !(r < unicode.MaxASCII && (unicode.IsLetter(r) || unicode.IsDigit(r)) || r == '.' || r == '_' || r == '-') {
			return fmt.Errorf("name: %q: use only letters, digits, '.', '_' and '-'", name)
		}
	}
	return nil
}

// RowError is a problem with one row of a reference: Row is its index in
// Items or Parents (0-based), Field the offending field.
type RowError struct {
	Row   int
	Field string
	Err   error
}

func (e *RowError) Error() string {
	return fmt.Sprintf("row %d: field %q: %v", e.Row+1, e.Field, e.Err)
}

func (e *RowError) Unwrap() error { return e.Err }

// Validate checks the reference's rules against the codebook: classes are
// keys, a parent score's question is a class key or "position" (ordinal
// codebooks only; "" means "position", so a nominal codebook needs a class
// key), and its value lies in the question's range. It does not check that
// items and parents exist (the store does). The first broken rule is
// returned, as a *RowError when it is a row's.
func (r *Reference) Validate(cb Codebook) error {
	if err := CheckReferenceName(r.Name); err != nil {
		return err
	}
	switch {
	case len(r.Items) > 0 && len(r.Parents) > 0:
		return errors.New("a reference holds item labels or parent scores, not both: add them as two references")
	case r.Len() == 0:
		return errors.New("the reference has no rows")
	}
	seen := map[string]int{}
	for i, l := range r.Items {
		if strings.TrimSpace(l.Item) == "" {
			return &RowError{i, "item", errors.New("empty item id")}
		}
		if _, ok := cb.Index(l.Class); !ok {
			return &RowError{i, "label", fmt.Errorf("label %q is not in the codebook (classes: %s)", l.Class, strings.Join(cb.Keys(), ", "))}
		}
		if j, ok := seen[l.Item]; ok {
			return &RowError{i, "item", fmt.Errorf("item %q is coded twice (first in row %d): a reference gives one label per item", l.Item, j+1)}
		}
		seen[l.Item] = i
	}
	for i, s := range r.Parents {
		if strings.TrimSpace(s.Parent) == "" {
			return &RowError{i, "parent", errors.New("empty parent")}
		}
		lo, hi, err := ScoreRange(cb, s.Question)
		if err != nil {
			return &RowError{i, "question", err}
		}
		if math.IsNaN(s.Value) || s.Value < lo || s.Value > hi {
			return &RowError{i, "value", fmt.Errorf("value %v is outside [%g, %g], the range of %s", s.Value, lo, hi, ScoreLabel(cb, s.Question))}
		}
		key := s.Parent + "\x00" + s.Question
		if j, ok := seen[key]; ok {
			return &RowError{i, "parent", fmt.Errorf("parent %q is scored twice on %s (first in row %d)", s.Parent, ScoreLabel(cb, s.Question), j+1)}
		}
		seen[key] = i
	}
	return nil
}

// ScoreRange returns the range of a parent score's value for question q
// (see ReferenceScore), or an error saying what questions the codebook
// allows.
func ScoreRange(cb Codebook, q string) (lo, hi float64, err error) {
	if q == "" || q == PositionQuestion {
		if !cb.IsOrdinal() {
			return 0, 0, fmt.Errorf("question %q: the codebook is nominal, so a parent score must name the class whose share it gives (classes: %s)", q, strings.Join(cb.Keys(), ", "))
		}
		return 1, float64(len(cb.Classes)), nil
	}
	if _, ok := cb.Index(q); ok {
		return 0, 1, nil
	}
	want := "a class key (the value is its share)"
	if cb.IsOrdinal() {
		want += ` or "position" (the mean position)`
	}
	return 0, 0, fmt.Errorf("question %q is not %s; classes: %s", q, want, strings.Join(cb.Keys(), ", "))
}

// ScoreLabel names what a parent score for question q measures, for
// people: "mean position (1–4)" or "share of litter".
func ScoreLabel(cb Codebook, q string) string {
	if q == "" || q == PositionQuestion {
		return fmt.Sprintf("mean position (1–%d)", len(cb.Classes))
	}
	return "share of " + q
}
