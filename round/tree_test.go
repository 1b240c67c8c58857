package round

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"reflect"
	"testing"

	"handoff"
	"handoff/store"
)

// simTree is an invented two-level project: a topic (a, b, c) and, when the
// topic is a or b, a severity (low, mid, high). Each item is labelled by
// five of twelve annotators who answer correctly with probability acc (a
// uniformly wrong class otherwise) and answer the severity when their own
// topic answer calls for it, as the labelling page would ask.
type simTree struct {
	cb       handoff.Codebook
	items    []handoff.Item
	topic    []int // true topic per item
	severity []int // true severity per item (-1 when not asked)
	first    []handoff.Label
	follow   []handoff.Label
}

func newSimTree(n int, acc float64, seed uint64) *simTree {
	cls := func(keys ...string) []handoff.Class {
		var out []handoff.Class
		for _, k := range keys {
			out = append(out, handoff.Class{Key: k})
		}
		return out
	}
	s := &simTree{cb: handoff.Codebook{Name: "reports", Key: "topic", Question: "What is it about?", Classes: cls("a", "b", "c"),
		Questions: []handoff.Question{{Key: "severity", Question: "How bad?", Scale: handoff.Ordinal, Classes: cls("low", "mid", "high"),
			When: &handoff.Condition{Question: "topic", In: []string{"a", "b"}}}}}}
	r := rand.New(rand.NewPCG(seed, 1))
	answer := func(truth, k int) int {
		if r.Float64() < acc {
			return truth
		}
		return (truth + 1 + r.IntN(k-1)) % k
	}
	for i := range n {
		id := fmt.Sprintf("r%03d", i)
		s.items = append(s.items, handoff.Item{ID: id, Kind: handoff.KindText, Text: "report " + id})
		tp, sv := r.IntN(3), -1
		if tp < 2 {
			sv = r.IntN(3)
		}
		s.topic, s.severity = append(s.topic, tp), append(s.severity, sv)
		for _, a := range r.Perm(12)[:5] {
			ann := fmt.Sprintf("ann%02d", a)
			got := answer(tp, 3)
			s.first = append(s.first, handoff.Label{Item: id, Annotator: ann, Class: s.cb.Classes[got].Key})
			if got < 2 {
				truth := sv
				if truth < 0 { // asked by mistake: the answer is noise
					truth = r.IntN(3)
				}
				s.follow = append(s.follow, handoff.Label{Item: id, Annotator: ann, Question: "severity", Class: s.cb.Questions[0].Classes[answer(truth, 3)].Key})
			}
		}
	}
	return s
}

func (s *simTree) store(t *testing.T, cb handoff.Codebook, labels ...[]handoff.Label) *store.Store {
	t.Helper()
	st, err := store.Create(filepath.Join(t.TempDir(), "p"), cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	if _, err := st.PutItems(s.items, false, "test"); err != nil {
		t.Fatal(err)
	}
	for _, ls := range labels {
		if _, err := st.PutLabels(ls, "test"); err != nil {
			t.Fatal(err)
		}
	}
	return st
}

func TestQuestionConsensus(t *testing.T) {
	s := newSimTree(300, 0.8, 5)
	tree := s.store(t, s.cb, s.first, s.follow)
	one := s.store(t, s.cb.Sub(0), s.first)
	cfg := DefaultConsensus()

	// Before the first question's consensus, the follow-up cannot be combined.
	if _, err := QuestionConsensus(tree, "severity", cfg, "test"); !errors.Is(err, ErrNothing) {
		t.Errorf("follow-up before its parent: %v, want ErrNothing", err)
	}
	if _, err := QuestionConsensus(tree, "colour", cfg, "test"); err == nil {
		t.Error("unknown question accepted")
	}
	// The first question's consensus is the one-question project's, byte for byte.
	for _, st := range []*store.Store{tree, one} {
		if _, err := QuestionConsensus(st, "", cfg, "test"); err != nil {
			t.Fatal(err)
		}
	}
	tcs, tmeta, _ := tree.Consensus()
	ocs, ometa, _ := one.Consensus()
	if !reflect.DeepEqual(tcs, ocs) || !bytes.Equal(tmeta, ometa) {
		t.Error("the first question's consensus in a tree differs from the one-question project's")
	}

	rep, err := QuestionConsensus(tree, "severity", cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	cs, stored, err := StoredQuestionConsensus(tree, "severity")
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(stored.Classes, []string{"low", "mid", "high"}) || rep.Question != "severity" || len(rep.Annotators) != 12 {
		t.Errorf("report: question %q classes %v, %d annotators", rep.Question, stored.Classes, len(rep.Annotators))
	}
	// Asked exactly where the topic consensus is a or b.
	topicOf := map[string]string{}
	asked := 0
	for _, c := range tcs {
		topicOf[c.Item] = c.Class
		if c.Class != "c" {
			asked++
		}
	}
	if rep.Items != asked || rep.NotAsked != len(s.items)-asked {
		t.Errorf("items asked %d, not asked %d; want %d, %d", rep.Items, rep.NotAsked, asked, len(s.items)-asked)
	}
	right, scored := 0, 0
	idx := map[string]int{}
	for i, it := range s.items {
		idx[it.ID] = i
	}
	for _, c := range cs {
		if topicOf[c.Item] == "c" {
			t.Errorf("item %s has a severity though its topic consensus is c", c.Item)
		}
		if sv := s.severity[idx[c.Item]]; sv >= 0 {
			scored++
			if c.Class == s.cb.Questions[0].Classes[sv].Key {
				right++
			}
		}
	}
	// Five labels at accuracy 0.8 out of three classes: a majority of five
	// is right with probability ≥ 0.94; fewer reach the severity.
	if acc := float64(right) / float64(scored); acc < 0.9 || scored < asked*9/10 {
		t.Errorf("severity consensus accuracy %.3f over %d items (of %d asked), want ≥ 0.9", acc, scored, asked)
	}
	// Per-question reliability: every annotator's is close to the simulated 0.8.
	for _, a := range rep.Annotators {
		if a.Reliability < 0.6 || a.Reliability > 0.95 {
			t.Errorf("annotator %s: severity reliability %.3f, simulated 0.8", a.ID, a.Reliability)
		}
	}
	ag, err := QuestionAgreement(tree, "severity", AgreementConfig{Rules: cfg.Rules, Reps: 50, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if ag.Labels != len(s.follow) || !ag.Ordinal {
		t.Errorf("severity agreement over %d labels (ordinal %v), want %d", ag.Labels, ag.Ordinal, len(s.follow))
	}
	a1, _ := QuestionAgreement(tree, "", AgreementConfig{Rules: cfg.Rules, Reps: 50, Seed: 1})
	a2, _ := Agreement(one, AgreementConfig{Rules: cfg.Rules, Reps: 50, Seed: 1})
	if a1 == nil || a1.Question != "topic" {
		t.Fatalf("first question's agreement: %+v", a1)
	}
	a1.Question = ""
	if !reflect.DeepEqual(a1, a2) {
		t.Error("the first question's agreement in a tree differs from the one-question project's")
	}
}

func TestQuestionOrder(t *testing.T) {
	cb := handoff.Codebook{Key: "a", Question: "?", Classes: []handoff.Class{{Key: "x"}, {Key: "y"}},
		Questions: []handoff.Question{
			{Key: "c", Question: "?", Classes: []handoff.Class{{Key: "x"}, {Key: "y"}}, When: &handoff.Condition{Question: "b", In: []string{"x"}}},
			{Key: "b", Question: "?", Classes: []handoff.Class{{Key: "x"}, {Key: "y"}}, When: &handoff.Condition{Question: "a", In: []string{"x"}}},
			{Key: "d", Question: "?", Classes: []handoff.Class{{Key: "x"}, {Key: "y"}}},
		}}
	if err := cb.Validate(); err != nil {
		t.Fatal(err)
	}
	if got, want := QuestionOrder(cb), []int{0, 2, 1, 3}; !reflect.DeepEqual(got, want) {
		t.Errorf("order %v, want %v (b before c)", got, want)
	}
}

// The first question's round in a tree is the one-question project's: the
// same consensus, model, training and verdict, byte for byte, with
// follow-up labels stored; the tree's round adds its questions (the first
// one's figures are the round's) and a batch that weighs the follow-up.
func TestTreeRoundIsTheFirstQuestions(t *testing.T) {
	var rounds []*Result
	var models, metas [][]byte
	for _, tree := range []bool{false, true} {
		st, d := smallProject(t, t.TempDir(), 3)
		if tree {
			first := st.Codebook().Classes[0].Key
			if _, err := st.AddQuestion(handoff.Question{Key: "severity", Question: "How bad?", Scale: handoff.Ordinal,
				Classes: []handoff.Class{{Key: "1"}, {Key: "2"}, {Key: "3"}}, When: &handoff.Condition{Question: "main", In: []string{first}}}, "test"); err != nil {
				t.Fatal(err)
			}
			items, _, _ := d.Of(handoff.KindText)
			var ls []handoff.Label
			for i, it := range items[:100] {
				ls = append(ls, handoff.Label{Item: it.ID, Annotator: fmt.Sprintf("sev%d", i%4), Question: "severity", Class: fmt.Sprint(1 + i%3)})
			}
			if _, err := st.PutLabels(ls, "test"); err != nil {
				t.Fatal(err)
			}
		}
		cfg := DefaultConfig()
		cfg.Seed, cfg.Batch, cfg.Verdict.Bootstrap = 7, 50, 200
		r, err := Run(st, cfg, "test")
		if err != nil {
			t.Fatal(err)
		}
		mb, _ := st.Model(r.Model)
		_, meta, _ := st.Consensus()
		rounds, models, metas = append(rounds, r), append(models, mb), append(metas, meta)
	}
	if !bytes.Equal(metas[0], metas[1]) || !bytes.Equal(models[0], models[1]) {
		t.Errorf("the first question's consensus or model in a tree differs from the one-question project's")
	}
	js := func(v any) string { b, _ := json.Marshal(v); return string(b) }
	one, tree := rounds[0], rounds[1]
	if js(one.Train) != js(tree.Train) || js(one.Verdict) != js(tree.Verdict) || one.Fingerprint != tree.Fingerprint {
		t.Errorf("the first question's training or verdict in a tree differs from the one-question project's")
	}
	if len(one.Questions) != 0 || len(tree.Questions) != 2 || tree.Questions[0].Key != "main" ||
		js(tree.Questions[0].Verdict) != js(one.Verdict) || tree.Questions[1].Key != "severity" {
		t.Errorf("questions: one-question %d, tree %d", len(one.Questions), len(tree.Questions))
	}
}

func TestQuestions(t *testing.T) {
	s := newSimTree(120, 0.8, 9)
	st := s.store(t, s.cb, s.first, s.follow)
	if _, err := QuestionConsensus(st, "", DefaultConsensus(), "test"); err != nil {
		t.Fatal(err)
	}
	qs, err := Questions(st)
	if err != nil {
		t.Fatal(err)
	}
	if len(qs) != 2 || qs[0].Key != "topic" || qs[1].Key != "severity" || qs[1].Parent != "topic" ||
		!reflect.DeepEqual(qs[1].When, []string{"a", "b"}) || qs[1].Scale != "ordinal" {
		t.Fatalf("questions: %+v", qs)
	}
	if qs[0].Labels != len(s.first) || qs[1].Labels != len(s.follow) || qs[0].Items != 120 {
		t.Errorf("labels %d/%d items %d, want %d/%d 120", qs[0].Labels, qs[1].Labels, qs[0].Items, len(s.first), len(s.follow))
	}
	if qs[0].Consensus == nil || qs[1].Consensus != nil {
		t.Errorf("consensus stored: first %v follow-up %v, want only the first", qs[0].Consensus != nil, qs[1].Consensus != nil)
	}
}
