package store

import (
	"bytes"
	"encoding/binary"
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

// treeCodebook is testCodebook's question with a follow-up asked when the
// answer is a or b.
var treeCodebook = handoff.Codebook{
	Name: "topic", Key: "topic", Question: "What is it about?",
	Classes: testCodebook.Classes,
	Questions: []handoff.Question{{Key: "severity", Question: "How bad?", Scale: handoff.Ordinal,
		Classes: []handoff.Class{{Key: "low"}, {Key: "mid"}, {Key: "high"}},
		When:    &handoff.Condition{Question: "topic", In: []string{"a", "b"}}}},
}

// rawLabels returns the label bucket's values in key order.
func rawLabels(t *testing.T, s *Store) [][]byte {
	t.Helper()
	var out [][]byte
	if err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bLabels).ForEach(func(k, v []byte) error {
			out = append(out, append([]byte(nil), v...))
			return nil
		})
	}); err != nil {
		t.Fatal(err)
	}
	return out
}

func newTreeStore(t *testing.T, cb handoff.Codebook) *Store {
	t.Helper()
	s, err := Create(t.TempDir(), cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	if _, err := s.PutItems(textItems(3, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	return s
}

// The first question's labels are stored with the bytes written before
// trees (uvarint item, annotator, class, varint time), in a one-question
// project and in a tree alike; a follow-up's class carries its question in
// the upper 8 bits.
func TestTreeLabelBytes(t *testing.T) {
	first := []handoff.Label{{Item: "i001", Annotator: "x", Class: "c"}, {Item: "i002", Annotator: "y", Class: "b"}}
	old := newTreeStore(t, testCodebook)
	if _, err := old.PutLabels(first, "test"); err != nil {
		t.Fatal(err)
	}
	want := [][]byte{{1, 0, 2, 0}, {2, 1, 1, 0}}
	if got := rawLabels(t, old); !reflect.DeepEqual(got, want) {
		t.Fatalf("one-question label bytes %v, want %v", got, want)
	}
	tree := newTreeStore(t, treeCodebook)
	labels := append(append([]handoff.Label(nil), first...),
		handoff.Label{Item: "i001", Annotator: "x", Question: "severity", Class: "high"})
	if _, err := tree.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	raw := rawLabels(t, tree)
	if !reflect.DeepEqual(raw[:2], want) {
		t.Errorf("tree: first-question label bytes %v, want %v", raw[:2], want)
	}
	code := binary.AppendUvarint(nil, 1<<8|2)
	if wantF := append(append([]byte{1, 0}, code...), 0); !bytes.Equal(raw[2], wantF) {
		t.Errorf("follow-up label bytes %v, want %v", raw[2], wantF)
	}
	got, err := tree.Labels()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, labels) {
		t.Errorf("labels read back %+v, want %+v", got, labels)
	}
	tab, err := tree.LabelTable(false)
	if err != nil {
		t.Fatal(err)
	}
	if q, c := tab.Question(2), tab.ClassIn(2); q != 1 || c != 2 {
		t.Errorf("label 2: question %d class %d, want 1 2", q, c)
	}
	if q, c := tab.Names(2); q != "severity" || c != "high" || !tab.Tree() {
		t.Errorf("label 2 names %q %q", q, c)
	}
	if q, c := tab.Names(1); q != "" || c != "b" {
		t.Errorf("label 1 names %q %q", q, c)
	}
	sub := tab.ForQuestion(treeCodebook, 1)
	if sub.Len() != 1 || sub.Class[0] != 2 || sub.Item[0] != 1 || !reflect.DeepEqual(sub.Classes, []string{"low", "mid", "high"}) {
		t.Errorf("ForQuestion(1): %+v", sub)
	}
	if f := tab.ForQuestion(treeCodebook, 0); f.Len() != 2 || f.Class[0] != 2 || f.Class[1] != 1 {
		t.Errorf("ForQuestion(0): %+v", f)
	}
}

func TestTreeLabelRefused(t *testing.T) {
	cases := []struct {
		name, field, msg string
		l                handoff.Label
	}{
		{"unknown question", "question", `question "colour" is not in the codebook (questions: topic, severity)`,
			handoff.Label{Item: "i000", Annotator: "x", Question: "colour", Class: "a"}},
		{"class of another question", "label", `label "a" is not a class of question "severity" (classes: [low mid high])`,
			handoff.Label{Item: "i000", Annotator: "x", Question: "severity", Class: "a"}},
		{"follow-up class as first answer", "label", `label "low" is not in the codebook`,
			handoff.Label{Item: "i000", Annotator: "x", Class: "low"}},
	}
	s := newTreeStore(t, treeCodebook)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			for _, via := range []string{"import", "submit"} {
				var err error
				if via == "import" {
					_, err = s.PutLabels([]handoff.Label{{Item: "i001", Annotator: "y", Class: "a"}, c.l}, "test")
				} else {
					_, err = s.Submit(Submission{Label: c.l, Key: "k"}, "test")
				}
				var de *DataError
				if !errors.As(err, &de) || de.Field != c.field || !strings.Contains(err.Error(), c.msg) {
					t.Errorf("%s: error %v, want field %q with %q", via, err, c.field, c.msg)
				}
			}
			if raw := rawLabels(t, s); len(raw) != 0 {
				t.Errorf("%d labels stored after a refused import", len(raw))
			}
		})
	}
}

// A person answers each question of an item once; idempotency keys are
// checked within a question.
func TestTreeSubmit(t *testing.T) {
	s := newTreeStore(t, treeCodebook)
	now := time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC)
	s.Now = func() time.Time { return now }
	lab := func(q, class string) handoff.Label {
		return handoff.Label{Item: "i000", Annotator: "ann", Question: q, Class: class, Time: now}
	}
	if _, err := s.Submit(Submission{Label: lab("", "a"), Key: "k1"}, "test"); err != nil {
		t.Fatal(err)
	}
	r, err := s.Submit(Submission{Label: lab("severity", "mid"), Key: "k2"}, "test")
	if err != nil || r.Duplicate || r.N != 1 {
		t.Fatalf("follow-up answer: %+v %v", r, err)
	}
	if r, err := s.Submit(Submission{Label: lab("severity", "mid"), Key: "k2"}, "test"); err != nil || !r.Duplicate || r.N != 1 || r.Label.Question != "severity" {
		t.Errorf("retry of the follow-up: %+v %v", r, err)
	}
	if _, err := s.Submit(Submission{Label: lab("severity", "low"), Key: "k3"}, "test"); !errors.Is(err, ErrAlreadyLabelled) {
		t.Errorf("second follow-up answer: %v, want ErrAlreadyLabelled", err)
	}
	if _, err := s.Submit(Submission{Label: lab("severity", "low"), Key: "k2"}, "test"); !errors.Is(err, ErrKeyReused) {
		t.Errorf("key reused for another class: %v, want ErrKeyReused", err)
	}
	if _, err := s.Submit(Submission{Label: lab("", "b"), Key: "k4"}, "test"); !errors.Is(err, ErrAlreadyLabelled) {
		t.Errorf("second first answer: %v, want ErrAlreadyLabelled", err)
	}
	// The latest label (the follow-up) can be changed within its question only.
	if _, err := s.ChangeLabel("ann", "i000", "a", time.Time{}, "test"); err == nil {
		t.Error("changed a severity label to a topic class")
	}
	l, err := s.ChangeLabel("ann", "i000", "high", time.Time{}, "test")
	if err != nil || l.Question != "severity" || l.Class != "high" {
		t.Errorf("change within the question: %+v %v", l, err)
	}
}

// AddQuestion validates the whole new codebook and changes nothing else.
func TestAddQuestion(t *testing.T) {
	s := newTreeStore(t, testCodebook)
	if _, err := s.PutLabels([]handoff.Label{{Item: "i000", Annotator: "x", Class: "a"}, {Item: "i001", Annotator: "x", Class: "c"}}, "test"); err != nil {
		t.Fatal(err)
	}
	if err := s.PutConsensus([]handoff.Consensus{{Item: "i000", Class: "a", Posterior: []float64{0.9, 0.05, 0.05}, Method: "m", Labels: 1}}, []byte(`{"m":1}`), "test"); err != nil {
		t.Fatal(err)
	}
	beforeLabels := rawLabels(t, s)
	beforeCS, beforeMeta, err := s.Consensus()
	if err != nil {
		t.Fatal(err)
	}
	bad := []struct {
		name, msg string
		q         handoff.Question
	}{
		{"unknown parent", `"colour" is not a question of this codebook`, handoff.Question{Key: "severity", Question: "How bad?",
			Classes: []handoff.Class{{Key: "low"}, {Key: "high"}}, When: &handoff.Condition{Question: "colour", In: []string{"a"}}}},
		{"unknown parent class", `"z" is not a class of question "main"`, handoff.Question{Key: "severity", Question: "How bad?",
			Classes: []handoff.Class{{Key: "low"}, {Key: "high"}}, When: &handoff.Condition{Question: "main", In: []string{"z"}}}},
		{"first question's key", `"main" is the first question's key`, handoff.Question{Key: "main", Question: "How bad?",
			Classes: []handoff.Class{{Key: "low"}, {Key: "high"}}}},
	}
	for _, c := range bad {
		if _, err := s.AddQuestion(c.q, "test"); err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: error %v, want %q", c.name, err, c.msg)
		}
	}
	if s.Codebook().Tree() {
		t.Fatal("a refused question was added")
	}
	q := handoff.Question{Key: "severity", Question: "How bad?", Classes: []handoff.Class{{Key: "low"}, {Key: "high"}},
		When: &handoff.Condition{Question: "main", In: []string{"a", "b"}}}
	cb, err := s.AddQuestion(q, "test")
	if err != nil {
		t.Fatal(err)
	}
	if !cb.Tree() || !reflect.DeepEqual(s.Codebook(), cb) {
		t.Errorf("codebook after AddQuestion: %+v", s.Codebook())
	}
	if _, err := s.PutLabels([]handoff.Label{{Item: "i000", Annotator: "y", Question: "severity", Class: "high"}}, "test"); err != nil {
		t.Fatal(err)
	}
	dir := s.dir
	s.Close()
	s2, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	if !reflect.DeepEqual(s2.Codebook(), cb) {
		t.Errorf("codebook reopened %+v, want %+v", s2.Codebook(), cb)
	}
	after := rawLabels(t, s2)
	if !reflect.DeepEqual(after[:2], beforeLabels) {
		t.Errorf("label bytes changed: %v → %v", beforeLabels, after[:2])
	}
	cs, meta, err := s2.Consensus()
	if err != nil || !reflect.DeepEqual(cs, beforeCS) || !bytes.Equal(meta, beforeMeta) {
		t.Errorf("consensus changed: %+v %s (%v)", cs, meta, err)
	}
	ls, _ := s2.Labels()
	if len(ls) != 3 || ls[0].Question != "" || ls[2].Question != "severity" || ls[2].Class != "high" {
		t.Errorf("labels after reopening: %+v", ls)
	}
	audit, _ := s2.Audit()
	if a := audit[len(audit)-2]; a.Action != "codebook.add-question" {
		t.Errorf("audit entry %+v, want codebook.add-question", a)
	}
}

// Machine labels are kept per question: a record written before question
// trees (keyed by item id, no question field) reads as the first
// question's, a follow-up's machine label of the same item sits beside it,
// and a new first-question label replaces the old one only.
func TestMachineLabelsPerQuestion(t *testing.T) {
	s := newTreeStore(t, treeCodebook)
	old := []byte(`{"item":"i001","class":"a","confidence":0.9,"model":"r1-old","round":1}`)
	if err := s.db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bMachineLabels).Put([]byte("i001"), old) }); err != nil {
		t.Fatal(err)
	}
	read := func() []handoff.MachineLabel {
		t.Helper()
		var got []handoff.MachineLabel
		if err := s.MachineLabels(func(m handoff.MachineLabel) error { got = append(got, m); return nil }); err != nil {
			t.Fatal(err)
		}
		sn, err := s.Snapshot(SnapshotOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(sn.Machine, got) {
			t.Errorf("snapshot machine labels %+v, MachineLabels %+v", sn.Machine, got)
		}
		return got
	}
	if got := read(); len(got) != 1 || got[0].Question != "" || got[0].Class != "a" {
		t.Fatalf("old record read as %+v, want the first question's class a", got)
	}
	sev := handoff.MachineLabel{Item: "i001", Question: "severity", Class: "high", Confidence: 0.8, Model: "r2-sev", Round: 2}
	first := handoff.MachineLabel{Item: "i001", Class: "b", Confidence: 0.95, Model: "r2-top", Round: 2}
	other := handoff.MachineLabel{Item: "i002", Question: "severity", Class: "low", Confidence: 0.7, Model: "r2-sev", Round: 2}
	if err := s.CommitRound(RoundWrite{Round: 2, Machine: []handoff.MachineLabel{sev, other}}, "test"); err != nil {
		t.Fatal(err)
	}
	if got := read(); len(got) != 3 || got[0].Class != "a" || !reflect.DeepEqual(got[1:], []handoff.MachineLabel{sev, other}) {
		t.Fatalf("after a follow-up's labels: %+v", got)
	}
	if err := s.CommitRound(RoundWrite{Round: 3, Machine: []handoff.MachineLabel{first}}, "test"); err != nil {
		t.Fatal(err)
	}
	if got := read(); len(got) != 3 || !reflect.DeepEqual(got[:2], []handoff.MachineLabel{first, sev}) {
		t.Fatalf("after a new first-question label: %+v, want it to replace the old one and keep the follow-up's", got)
	}
}
