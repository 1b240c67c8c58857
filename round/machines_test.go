package round

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"testing"

	"handoff"
	"handoff/selector"
	"handoff/store"
)

// worded gives the simulated tree's items texts a machine can learn from:
// three words of the true topic's vocabulary, two of the true severity's
// when severityWords (none otherwise) and three fillers; every word list
// is invented.
func (s *simTree) worded(severityWords bool, seed uint64) {
	topic := [][]string{{"oil", "spill", "slick", "sheen", "diesel", "fumes"}, {"erosion", "bank", "collapse", "slump", "undercut", "roots"}, {"litter", "bench", "picnic", "bins", "path", "sign"}}
	sev := [][]string{{"minor", "slight", "small", "faint"}, {"moderate", "notable", "growing", "spreading"}, {"severe", "major", "serious", "huge"}}
	filler := []string{"river", "today", "near", "bridge", "saw", "walk", "morning", "upstream", "weir", "dog", "photo", "left", "right", "reported", "again"}
	r := rand.New(rand.NewPCG(seed, 3))
	for i := range s.items {
		var w []string
		for range 3 {
			w = append(w, topic[s.topic[i]][r.IntN(6)])
		}
		if sv := s.severity[i]; severityWords && sv >= 0 {
			for range 2 {
				w = append(w, sev[sv][r.IntN(4)])
			}
		}
		for range 3 {
			w = append(w, filler[r.IntN(len(filler))])
		}
		r.Shuffle(len(w), func(a, b int) { w[a], w[b] = w[b], w[a] })
		s.items[i].Text = strings.Join(w, " ")
	}
}

// labelsOf returns the labels of the items at positions [from, to).
func (s *simTree) labelsOf(from, to int) []handoff.Label {
	in := map[string]bool{}
	for _, it := range s.items[from:to] {
		in[it.ID] = true
	}
	var out []handoff.Label
	for _, l := range append(slices.Clone(s.first), s.follow...) {
		if in[l.Item] {
			out = append(out, l)
		}
	}
	return out
}

func treeConfig() Config {
	cfg := DefaultConfig()
	cfg.Seed, cfg.Batch, cfg.Verdict.Bootstrap, cfg.Verdict.MaxError = 3, 40, 200, 0.1
	// The simulated crowd answers at once and never again: its five topic
	// labels (three or more severity labels) are the reference.
	cfg.Standard.Lag, cfg.Standard.Cap = 0, 3
	return cfg
}

// runTree runs rounds on the simulated tree, labelling 150 more items
// before each, and returns the last round.
func runTree(t *testing.T, s *simTree, st *store.Store, rounds int) *Result {
	t.Helper()
	var r *Result
	for k := range rounds {
		if _, err := st.PutLabels(s.labelsOf(150*k, min(150*(k+1), len(s.items))), "test"); err != nil {
			t.Fatal(err)
		}
		before, err := st.Audit()
		if err != nil {
			t.Fatal(err)
		}
		if r, err = Run(st, treeConfig(), "test"); err != nil {
			t.Fatal(err)
		}
		// One commit: one entry in the audit trail, and every question's
		// state is this round's.
		after, _ := st.Audit()
		if len(after) != len(before)+1 {
			t.Errorf("round %d wrote %d audit entries, want 1 (one commit)", r.Round, len(after)-len(before))
		}
		for _, q := range r.Questions[1:] {
			if q.Model == "" {
				continue
			}
			b, err := st.State(questionScoresState(q.Key))
			sc, _ := decodeScores(b)
			m, err2 := st.State(questionModelState(q.Key))
			if err != nil || err2 != nil || sc == nil || sc.Round != r.Round || sc.Model != q.Model || len(m) == 0 {
				t.Errorf("round %d: question %s's scores and model are not the round's", r.Round, q.Key)
			}
		}
		for _, q := range r.Questions {
			acc, rows := 0.0, 0
			if q.Train != nil {
				acc, rows = q.Train.CV.Accuracy, q.Train.Rows
			}
			why := q.Why
			if q.Verdict != nil && !q.Verdict.Decision.Go {
				why = strings.Join(q.Verdict.Decision.Reasons, "; ")
			}
			t.Logf("round %d %-8s verdict %-7q held-out %d of %d, machine on %d items, cv accuracy %.3f %s", r.Round, q.Key, q.Decision(), q.HeldOut, q.HeldOutAsked, rows, acc, why)
		}
	}
	return r
}

// A two-level project through several rounds: every question's consensus,
// machine and verdict land in the round's one commit; each question gets
// its own verdict (the topic can be learnt from the words, the severity
// not, when its words are left out); autolabel writes only the question
// with GO.
func TestTreeRoundsVerdictPerQuestion(t *testing.T) {
	s := newSimTree(800, 0.9, 21)
	s.worded(false, 4)
	st := s.store(t, s.cb)
	r := runTree(t, s, st, 4)
	if len(r.Questions) != 2 || r.Questions[0].Key != "topic" || r.Questions[1].Key != "severity" || r.Questions[1].Parent != "topic" {
		t.Fatalf("questions %+v", r.Questions)
	}
	top, sev := r.Questions[0], r.Questions[1]
	if top.Verdict != r.Verdict || top.Model != r.Model {
		t.Error("the first question's figures are not the round's")
	}
	if sev.Train == nil || sev.Verdict == nil || sev.Model == "" || sev.Model == r.Model {
		t.Fatalf("severity: train %v verdict %v model %q (%s)", sev.Train != nil, sev.Verdict != nil, sev.Model, sev.Why)
	}
	if top.Decision() != "GO" || sev.Decision() != "NOT YET" {
		t.Errorf("verdicts topic %s, severity %s; want GO and NOT YET (severity has no words to learn from)", top.Decision(), sev.Decision())
	}
	// Severity's machine is as good as guessing among three classes: its
	// cross-validated accuracy is far below the topic's.
	if sev.Train.CV.Accuracy > 0.6 || top.Train.CV.Accuracy < 0.9 {
		t.Errorf("cross-validated accuracy topic %.3f, severity %.3f", top.Train.CV.Accuracy, sev.Train.CV.Accuracy)
	}
	// The round stored the follow-up's consensus: no separate consensus
	// step is needed, and it is the one QuestionConsensus computes.
	cs, rep, err := StoredQuestionConsensus(st, "severity")
	if err != nil {
		t.Fatal(err)
	}
	if rep.Items != sev.Consensus.Items || len(cs) == 0 {
		t.Errorf("stored severity consensus: %d items, round's report %d", rep.Items, sev.Consensus.Items)
	}
	again, err := QuestionConsensus(st, "severity", r.Config.Consensus, "test")
	if err != nil {
		t.Fatal(err)
	}
	cs2, _, _ := StoredQuestionConsensus(st, "severity")
	if again.Items != rep.Items || len(cs2) != len(cs) || !reflect.DeepEqual(cs2, cs) {
		t.Error("the round's severity consensus differs from `loop consensus --question severity`'s")
	}
	// The board's figures carry every question's verdict.
	qs, err := Questions(st)
	if err != nil {
		t.Fatal(err)
	}
	if qs[0].Verdict != "GO" || qs[1].Verdict != "NOT YET" || qs[1].Why == "" {
		t.Errorf("question figures: %q %q (%s)", qs[0].Verdict, qs[1].Verdict, qs[1].Why)
	}
	// The round's text, the verdict report and the status show each question.
	text := r.Text("p", nil)
	for _, want := range []string{"questions (each with its own machine and verdict", "topic (the first question)", "severity (asked when topic is a or b)", "verdict: GO", "verdict: NOT YET", "Krippendorff's alpha (ordinal)"} {
		if !strings.Contains(text, want) {
			t.Errorf("round text lacks %q:\n%s", want, text)
		}
	}
	vr, err := Verdict(st, VerdictConfig{})
	if err != nil {
		t.Fatal(err)
	}
	var html strings.Builder
	if err := vr.WriteHTML(&html, ""); err != nil {
		t.Fatal(err)
	}
	if len(vr.Questions) != 2 || !strings.Contains(html.String(), `id="question-severity"`) || !strings.Contains(html.String(), "severity: NOT YET") {
		t.Errorf("verdict report: %d questions; HTML without the severity section", len(vr.Questions))
	}
	stat, err := ProjectStatus(st, Sections)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(stat.Text(), "question severity: ") || !strings.Contains(stat.Text(), "machine r4-severity-") {
		t.Errorf("status:\n%s", stat.Text())
	}
	// Autolabel: only the topic.
	al, err := Autolabel(st, AutolabelConfig{}, "test")
	if err != nil {
		t.Fatal(err)
	}
	var ms []handoff.MachineLabel
	st.MachineLabels(func(m handoff.MachineLabel) error { ms = append(ms, m); return nil })
	if len(ms) == 0 || len(ms) != al.Labelled || len(al.Questions) != 2 || al.Questions[0].Labelled != al.Labelled || al.Questions[1].Labelled != 0 {
		t.Fatalf("autolabel wrote %d (report %d, questions %+v)", len(ms), al.Labelled, al.Questions)
	}
	for _, m := range ms {
		if m.Question != "" {
			t.Fatalf("machine label of %q written without its GO: %+v", m.Question, m)
		}
	}
}

// With severity words, both questions reach GO, and autolabel writes the
// severity only on items whose topic answer — the crowd's, else the
// machine's label — is a or b.
func TestTreeAutolabelFollowsParent(t *testing.T) {
	s := newSimTree(800, 0.9, 21)
	s.worded(true, 4)
	st := s.store(t, s.cb)
	r := runTree(t, s, st, 4)
	for _, q := range r.Questions {
		if q.Decision() != "GO" {
			t.Fatalf("question %s: %q (%s), want GO", q.Key, q.Decision(), q.Why)
		}
	}
	if _, err := Autolabel(st, AutolabelConfig{}, "test"); err != nil {
		t.Fatal(err)
	}
	topic := map[string]string{}
	cons, _, _ := st.Consensus()
	for _, c := range cons {
		if c.Labels > 0 {
			topic[c.Item] = c.Class
		}
	}
	var sev []handoff.MachineLabel
	st.MachineLabels(func(m handoff.MachineLabel) error {
		if m.Question == "" {
			if _, ok := topic[m.Item]; !ok {
				topic[m.Item] = m.Class
			}
		} else {
			sev = append(sev, m)
		}
		return nil
	})
	idx := map[string]int{}
	for i, it := range s.items {
		idx[it.ID] = i
	}
	if len(sev) == 0 {
		t.Fatal("no severity machine labels")
	}
	right := 0
	for _, m := range sev {
		if c := topic[m.Item]; c != "a" && c != "b" {
			t.Fatalf("severity written on %s, whose topic answer is %q", m.Item, c)
		}
		if sv := s.severity[idx[m.Item]]; sv >= 0 && s.cb.Questions[0].Classes[sv].Key == m.Class {
			right++
		}
	}
	t.Logf("%d severity machine labels, %.3f right against the simulated truth", len(sev), float64(right)/float64(len(sev)))
}

// The batch's model-unsure picks are ranked by the tree's uncertainty
// Σ_q R_q·H_q computed from each question's stored scores.
func TestTreeSelectorWeights(t *testing.T) {
	s := newSimTree(800, 0.9, 21)
	s.worded(true, 4)
	st := s.store(t, s.cb)
	r := runTree(t, s, st, 1)
	sn, err := st.Snapshot(store.SnapshotOptions{})
	if err != nil {
		t.Fatal(err)
	}
	first, _ := decodeScores(sn.State[scoresState])
	qs, err := loadQuestionScores(sn, first)
	if err != nil || qs[1] == nil {
		t.Fatalf("severity scores: %v", err)
	}
	tree, _ := treeOf(s.cb)
	idx := map[string]int{}
	for i, it := range s.items {
		idx[it.ID] = i
	}
	unsure := 0
	prev := math.Inf(1)
	for _, b := range r.Batch {
		if b.Reason != string(selector.ReasonUnsure) {
			continue
		}
		i := idx[b.Item]
		u, err := selector.TreeUncertainty(tree, [][]float64{first.row(i), qs[1].row(i)})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(u-b.Score) > 1e-12 || b.Score > prev {
			t.Errorf("item %s: score %v, tree uncertainty %v (previous pick %v)", b.Item, b.Score, u, prev)
		}
		prev = b.Score
		unsure++
	}
	if unsure == 0 {
		t.Fatal("no model-unsure picks")
	}
}

// A question added later: the next round's batch asks it on items people
// labelled for the others, with a reason of its own, and `loop next`
// writes that batch.
func TestTreeAddQuestionAsked(t *testing.T) {
	s := newSimTree(800, 0.9, 21)
	s.worded(true, 4)
	st := s.store(t, s.cb)
	runTree(t, s, st, 1)
	if _, err := st.AddQuestion(handoff.Question{Key: "urgent", Question: "Needs action now?", Classes: []handoff.Class{{Key: "no"}, {Key: "yes"}},
		When: &handoff.Condition{Question: "topic", In: []string{"a"}}}, "test"); err != nil {
		t.Fatal(err)
	}
	// Before another round, `loop next` already asks it, and asking again
	// gives the same batch.
	n1, err := Next(st, NextConfig{}, "test")
	if err != nil {
		t.Fatal(err)
	}
	n2, _ := Next(st, NextConfig{}, "test")
	early := 0
	for _, b := range n1 {
		if b.Reason == ReasonQuestion && slices.Equal(b.Questions, []string{"urgent"}) {
			early++
		}
	}
	if early == 0 || early > 20 || len(n1) != 40 || !reflect.DeepEqual(n1, n2) {
		t.Errorf("next after add-question: %d of %d items ask it; the same again: %v", early, len(n1), reflect.DeepEqual(n1, n2))
	}
	r, err := RunWith(st, RunOptions{Config: ptr(treeConfig()), Force: true}, "test")
	if err != nil {
		t.Fatal(err)
	}
	cons, _, _ := st.Consensus()
	topic := map[string]string{}
	for _, c := range cons {
		if c.Labels > 0 {
			topic[c.Item] = c.Class
		}
	}
	asks := 0
	for _, b := range r.Batch {
		if b.Reason != ReasonQuestion {
			if len(b.Questions) != 0 {
				t.Errorf("item %s (%s) names questions %v", b.Item, b.Reason, b.Questions)
			}
			continue
		}
		asks++
		if !slices.Equal(b.Questions, []string{"urgent"}) || topic[b.Item] != "a" {
			t.Errorf("item %s asked %v with topic consensus %q", b.Item, b.Questions, topic[b.Item])
		}
	}
	if asks == 0 || asks > r.Config.Batch/2 || len(r.Batch) != r.Config.Batch {
		t.Errorf("%d asks of the new question in a batch of %d, want some and at most half of %d", asks, len(r.Batch), r.Config.Batch)
	}
	if q := r.Questions[2]; q.Key != "urgent" || q.Verdict != nil || q.Train != nil || !strings.HasPrefix(q.Why, "no verdict yet: ") {
		t.Errorf("the new question: %+v", q)
	}
	next, err := Next(st, NextConfig{}, "test")
	if err != nil {
		t.Fatal(err)
	}
	if !slices.EqualFunc(next, r.Batch, func(a, b BatchItem) bool {
		return a.Item == b.Item && a.Reason == b.Reason && slices.Equal(a.Questions, b.Questions)
	}) {
		t.Error("`loop next` does not write the round's batch")
	}
	// Picked again with other batch settings, the batch keeps asking it.
	again, err := Next(st, NextConfig{Overrides: []Override{{Key: "batch", Value: "30"}}}, "test")
	if err != nil {
		t.Fatal(err)
	}
	kept := 0
	for _, b := range again {
		if b.Reason == ReasonQuestion && slices.Equal(b.Questions, []string{"urgent"}) {
			kept++
		}
	}
	if len(again) != 30 || kept == 0 || kept > 15 {
		t.Errorf("batch of 30 picked again: %d items, %d asking the new question", len(again), kept)
	}
	// Nothing else runs: without labels new, the round refuses.
	if _, err := Run(st, treeConfig(), "test"); !errors.Is(err, ErrNoNewLabels) {
		t.Errorf("a round without new labels: %v", err)
	}
}

func ptr[T any](v T) *T { return &v }
