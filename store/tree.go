package store

import (
	"encoding/json"
	"fmt"
	"strings"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// Question trees. A label's question q (its position in Codebook.All(), 0
// for the first question) is kept in the upper 8 bits of the stored class:
//
//	LabelRecord.Class = uint16(q)<<8 | class index within question q
//
// so the labels of a one-question codebook, and the first question's labels
// of any codebook, are stored exactly as before trees (no migration). A tree
// codebook therefore has at most 256 questions of at most 256 classes each.

// maxTree is the number of questions, and of classes per question, that a
// tree codebook may have (8 bits each in the stored class).
const maxTree = 256

// checkTree refuses a tree codebook that does not fit the 8+8 bits of the
// stored class.
func checkTree(cb handoff.Codebook) error {
	if !cb.Tree() {
		return nil
	}
	all := cb.All()
	if len(all) > maxTree {
		return fmt.Errorf("questions: %d questions; a codebook may have at most %d", len(all), maxTree)
	}
	for _, q := range all {
		if len(q.Classes) > maxTree {
			return fmt.Errorf("question %q has %d classes; a question of a tree may have at most %d", q.Key, len(q.Classes), maxTree)
		}
	}
	return nil
}

// classCode returns the stored class of a label: question (a key, "" for the
// first) and class key. An unknown question is a *DataError on field
// "question", a class that is not one of the question's on field "label".
func (s *Store) classCode(question, class string) (uint16, error) {
	q, ok := s.cb.QuestionIndex(question)
	if !ok {
		return 0, dataErr("question", "question %q is not in the codebook (questions: %s)", question, strings.Join(s.questionKeys(), ", "))
	}
	ci, ok := s.qIx[q][class]
	if !ok {
		if q == 0 {
			return 0, dataErr("label", "label %q is not in the codebook (classes: %v)", class, s.cb.Keys())
		}
		return 0, dataErr("label", "label %q is not a class of question %q (classes: %v)", class, s.cb.All()[q].Key, s.cb.Sub(q).Keys())
	}
	return uint16(q)<<8 | uint16(ci), nil
}

func (s *Store) questionKeys() []string {
	var ks []string
	for _, q := range s.cb.All() {
		ks = append(ks, q.Key)
	}
	return ks
}

// splitClass returns the question and the class within it of a stored class.
func splitClass(cb handoff.Codebook, c uint16) (q, class int) {
	if !cb.Tree() {
		return 0, int(c)
	}
	return int(c >> 8), int(c & 0xff)
}

// classOf returns the question key ("" for the first question) and the
// class key of a stored class, or errBadLabel if it names neither.
func (s *Store) classOf(c uint16) (question, class string, err error) {
	q, ci := splitClass(s.cb, c)
	all := s.cb.All()
	if q >= len(all) || ci >= len(all[q].Classes) {
		return "", "", errBadLabel
	}
	if q > 0 {
		question = all[q].Key
	}
	return question, all[q].Classes[ci].Key, nil
}

// Question returns the question of label i (its position in
// Codebook.All(); always 0 for a one-question codebook).
func (t *LabelTable) Question(i int) int {
	if !t.tree {
		return 0
	}
	return int(t.Class[i] >> 8)
}

// ClassIn returns the class of label i as an index within its question.
func (t *LabelTable) ClassIn(i int) int {
	if !t.tree {
		return int(t.Class[i])
	}
	return int(t.Class[i] & 0xff)
}

// Names returns the question key ("" for the first question) and the
// class key of label i.
func (t *LabelTable) Names(i int) (question, class string) {
	if !t.tree {
		return "", t.Classes[t.Class[i]]
	}
	q, c := t.Question(i), t.ClassIn(i)
	if q > 0 {
		question = t.all[q].Key
	}
	return question, t.all[q].Classes[c].Key
}

// Tree reports whether the table's labels come from a question tree (and
// may answer follow-up questions).
func (t *LabelTable) Tree() bool { return t.tree }

// ForQuestion returns the labels of question q only (q a position in
// Codebook.All()), with Class the index within the question and Classes the
// question's class keys: a table of the one-question codebook cb.Sub(q).
// The id slices are shared with t.
func (t *LabelTable) ForQuestion(cb handoff.Codebook, q int) *LabelTable {
	out := t.Where(func(i int) bool { return t.Question(i) == q })
	if t.tree {
		for k := range out.Class {
			out.Class[k] &= 0xff
		}
	}
	out.Classes, out.tree = cb.Sub(q).Keys(), false
	return out
}

// Where returns the labels i of t for which keep(i) is true, in order,
// with their times and seconds; the id slices and class keys are shared
// with t.
func (t *LabelTable) Where(keep func(i int) bool) *LabelTable {
	out := &LabelTable{ItemIDs: t.ItemIDs, AnnotatorIDs: t.AnnotatorIDs, Classes: t.Classes, tree: t.tree}
	for i := range t.Item {
		if !keep(i) {
			continue
		}
		out.Item = append(out.Item, t.Item[i])
		out.Annotator = append(out.Annotator, t.Annotator[i])
		out.Class = append(out.Class, t.Class[i])
		if t.Time != nil {
			out.Time = append(out.Time, t.Time[i])
		}
		if t.Seconds != nil {
			out.Seconds = append(out.Seconds, t.Seconds[i])
		}
	}
	return out
}

// AddQuestion adds a follow-up question to the stored codebook, after
// checking the whole new codebook (handoff.Codebook.Validate, and the
// limits of a tree). Nothing else stored changes: labels, consensus and
// models keep their bytes. The change is recorded in the audit trail as
// codebook.add-question.
func (s *Store) AddQuestion(q handoff.Question, source string) (handoff.Codebook, error) {
	cb := s.cb
	cb.Questions = append(append([]handoff.Question(nil), s.cb.Questions...), q)
	if err := cb.Validate(); err != nil {
		return handoff.Codebook{}, fmt.Errorf("codebook: %w", err)
	}
	if err := checkTree(cb); err != nil {
		return handoff.Codebook{}, fmt.Errorf("codebook: %w", err)
	}
	j, err := json.Marshal(cb)
	if err != nil {
		return handoff.Codebook{}, err
	}
	err = s.update(source, "codebook.add-question", fmt.Sprintf("question %q with %d classes", q.Key, len(q.Classes)), func(tx *bolt.Tx) error {
		return tx.Bucket(bMeta).Put(kCodebook, j)
	})
	if err != nil {
		return handoff.Codebook{}, err
	}
	s.setCodebook(cb)
	return cb, nil
}
