package round

import (
	"encoding/json"
	"errors"
	"fmt"
	"strings"

	"handoff"
	"handoff/store"
)

// Question trees: the first question's consensus is Consensus (and a
// round's); a follow-up question q is combined by QuestionConsensus over
// the labels of q only, on the items whose parent consensus class is one of
// q's condition (When.In), with the same code run on the one-question
// codebook cb.Sub(q). Gold answers the first question only, so a follow-up
// has no gold. Items not asked q have no consensus for q: they are not
// uncertain, the question does not apply to them.

// questionState is the name of the project state holding follow-up q's
// consensus.
func questionState(key string) string { return "consensus/" + key }

// storedQuestion is a follow-up's stored consensus.
type storedQuestion struct {
	Report    *ConsensusReport    `json:"report"`
	Consensus []handoff.Consensus `json:"consensus"`
}

// QuestionOrder returns the positions (in cb.All()) of every question with
// each parent before its follow-ups: the order in which their consensus is
// computed.
func QuestionOrder(cb handoff.Codebook) []int {
	n := len(cb.All())
	done := make([]bool, n)
	var out []int
	var visit func(q int)
	visit = func(q int) {
		if done[q] {
			return
		}
		done[q] = true // Validate refuses cycles
		if p := cb.Parent(q); p >= 0 {
			visit(p)
		}
		out = append(out, q)
	}
	for q := range n {
		visit(q)
	}
	return out
}

// questionIndex returns the position of question key ("" the first), or an
// error naming the questions.
func questionIndex(cb handoff.Codebook, key string) (int, error) {
	q, ok := cb.QuestionIndex(key)
	if !ok {
		var ks []string
		for _, x := range cb.All() {
			ks = append(ks, x.Key)
		}
		return 0, fmt.Errorf("--question %q: not a question of the codebook (questions: %s)", key, strings.Join(ks, ", "))
	}
	return q, nil
}

// parentClasses returns the consensus class of question p per item id.
func parentClasses(st *store.Store, sn *store.Snapshot, p int) (map[string]string, error) {
	cs := sn.Consensus
	if p > 0 {
		key := sn.Codebook.All()[p].Key
		var err error
		cs, _, err = StoredQuestionConsensus(st, key)
		if errors.Is(err, ErrNothing) {
			return nil, fmt.Errorf("%w: question %q has no consensus yet; run `loop consensus DIR --question %s` first", ErrNothing, key, key)
		}
		if err != nil {
			return nil, err
		}
	} else if sn.ConsensusMeta == nil {
		return nil, fmt.Errorf("%w: question %q has no consensus yet; run `loop consensus DIR --question %s` first", ErrNothing, sn.Codebook.FirstKey(), sn.Codebook.FirstKey())
	}
	out := make(map[string]string, len(cs))
	for _, c := range cs {
		out[c.Item] = c.Class
	}
	return out, nil
}

// questionProject is follow-up q as a one-question project: codebook
// cb.Sub(q), the labels of q on the items for which asked is true (all
// items when asked is nil), no gold.
func questionProject(sn *store.Snapshot, q int, asked []bool) (*project, error) {
	sub := *sn
	sub.Codebook = sn.Codebook.Sub(q)
	sub.Gold = nil
	t := sn.Labels.ForQuestion(sn.Codebook, q)
	if asked != nil {
		itemPos := make(map[string]int, len(sn.Items))
		for i, it := range sn.Items {
			itemPos[it.ID] = i
		}
		f := &store.LabelTable{ItemIDs: t.ItemIDs, AnnotatorIDs: t.AnnotatorIDs, Classes: t.Classes}
		for i := range t.Item {
			if j, ok := itemPos[t.ItemIDs[t.Item[i]]]; !ok || !asked[j] {
				continue
			}
			f.Item = append(f.Item, t.Item[i])
			f.Annotator = append(f.Annotator, t.Annotator[i])
			f.Class = append(f.Class, t.Class[i])
			if t.Time != nil {
				f.Time = append(f.Time, t.Time[i])
			}
			if t.Seconds != nil {
				f.Seconds = append(f.Seconds, t.Seconds[i])
			}
		}
		t = f
	}
	sub.Labels = t
	p, err := projectOf(&sub)
	if p != nil {
		p.ofTree = true
	}
	return p, err
}

// QuestionConsensus cleans and combines the labels of one question (key,
// "" the first) and stores the result: for the first question this is
// Consensus; for a follow-up, the consensus over its labels on the items
// where it is asked (its parent's stored consensus class is one of its
// condition's; every item for an unconditional follow-up), kept as project
// state beside the first question's. The report's Items is the number of
// items asked, NotAsked the rest.
func QuestionConsensus(st *store.Store, key string, cfg ConsensusConfig, source string) (*ConsensusReport, error) {
	cb := st.Codebook()
	q, err := questionIndex(cb, key)
	if err != nil {
		return nil, err
	}
	if q == 0 {
		r, err := Consensus(st, cfg, source)
		if r != nil && cb.Tree() {
			r.Question = cb.FirstKey()
		}
		return r, err
	}
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true})
	if err != nil {
		return nil, err
	}
	x := cb.All()[q]
	var asked []bool
	if p := cb.Parent(q); p >= 0 {
		pc, err := parentClasses(st, sn, p)
		if err != nil {
			return nil, err
		}
		in := map[string]bool{}
		for _, c := range x.When.In {
			in[c] = true
		}
		asked = make([]bool, len(sn.Items))
		for i, it := range sn.Items {
			c, ok := pc[it.ID]
			asked[i] = ok && in[c]
		}
	}
	_, _, sq, err := followUpConsensus(sn, q, asked, cfg)
	if err != nil {
		return nil, err
	}
	rep, cs := sq.Report, sq.Consensus
	j, err := json.Marshal(storedQuestion{Report: rep, Consensus: cs})
	if err != nil {
		return nil, err
	}
	if err := st.PutStates(map[string][]byte{questionState(x.Key): j}, "consensus.put", fmt.Sprintf("question %q: %d items", x.Key, len(cs)), source); err != nil {
		return nil, err
	}
	return rep, nil
}

// followUpConsensus cleans and combines follow-up q's labels on the items
// where it is asked (asked nil: every item) and returns its project, the
// consensus in memory and what is stored: the report (Items the items
// asked, NotAsked the rest) and the consensus of the items asked and
// answered.
func followUpConsensus(sn *store.Snapshot, q int, asked []bool, cfg ConsensusConfig) (*project, *consensusResult, *storedQuestion, error) {
	x := sn.Codebook.All()[q]
	p, err := questionProject(sn, q, asked)
	if err != nil {
		return nil, nil, nil, err
	}
	if p.labels.Len() == 0 {
		return nil, nil, nil, fmt.Errorf("%w: question %q has no labels on the items where it is asked; add some with `loop labels add` (a question column, or one column per question)", ErrNothing, x.Key)
	}
	cr, err := consensus(p, cfg)
	if err != nil {
		return nil, nil, nil, fmt.Errorf("question %q: %w", x.Key, err)
	}
	rep := cr.report
	rep.Question = x.Key
	var cs []handoff.Consensus
	nAsked, noLabels := 0, 0
	for i, c := range cr.cs {
		if asked != nil && !asked[i] {
			continue
		}
		nAsked++
		if c.Labels == 0 {
			noLabels++
			continue
		}
		cs = append(cs, c)
	}
	rep.Items, rep.NotAsked, rep.NoLabels = nAsked, len(sn.Items)-nAsked, noLabels
	return p, cr, &storedQuestion{Report: rep, Consensus: cs}, nil
}

// StoredQuestionConsensus returns the stored consensus of one question
// (key, "" the first) and its report, or ErrNothing when none was computed.
// A follow-up's consensus lists only the items where it was asked and
// answered.
func StoredQuestionConsensus(st *store.Store, key string) ([]handoff.Consensus, *ConsensusReport, error) {
	cb := st.Codebook()
	q, err := questionIndex(cb, key)
	if err != nil {
		return nil, nil, err
	}
	if q == 0 {
		return StoredConsensus(st)
	}
	k := cb.All()[q].Key
	b, err := st.State(questionState(k))
	if errors.Is(err, store.ErrNotFound) {
		return nil, nil, fmt.Errorf("%w: question %q has no consensus yet; run `loop consensus DIR --question %s` first", ErrNothing, k, k)
	}
	if err != nil {
		return nil, nil, err
	}
	var sq storedQuestion
	if err := json.Unmarshal(b, &sq); err != nil {
		return nil, nil, fmt.Errorf("reading the consensus of question %q: %w", k, err)
	}
	return sq.Consensus, sq.Report, nil
}

// QuestionAgreement measures the crowd's agreement on one question (key,
// "" the first) over all of that question's labels: the people who reached
// it.
func QuestionAgreement(st *store.Store, key string, cfg AgreementConfig) (*AgreementReport, error) {
	cb := st.Codebook()
	q, err := questionIndex(cb, key)
	if err != nil {
		return nil, err
	}
	if q == 0 {
		r, err := Agreement(st, cfg)
		if r != nil && cb.Tree() {
			r.Question = cb.FirstKey()
		}
		return r, err
	}
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true})
	if err != nil {
		return nil, err
	}
	p, err := questionProject(sn, q, nil)
	if err != nil {
		return nil, err
	}
	if p.labels.Len() == 0 {
		return nil, fmt.Errorf("%w: question %q has no labels yet; add some with `loop labels add`", ErrNothing, cb.All()[q].Key)
	}
	r, err := agreement(p, cfg)
	if r != nil {
		r.Question = cb.All()[q].Key
	}
	return r, err
}
