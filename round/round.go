// Package round runs the steps of the job on a project's store: clean and
// combine the crowd labels (Consensus), train the machine on the consensus
// (Train), and one whole round (Run): consensus → train → score the pool →
// pick the next batch → verdict. It is the only package that calls crowd,
// features, learner, selector and verdict together; cmd/loop and api both call
// it.
//
// A round is one pure step and one commit: a snapshot of the store read in
// one read transaction (items, labels, gold, state, machine labels,
// settings) → the round, which touches no store → one write transaction for
// everything it writes (consensus, model, round record, selection, state,
// scores). A crash part-way leaves the previous round as it was.
//
// Every step is deterministic given the store's contents and Config.Seed: the
// same store and settings give byte-identical stored results, from the
// command line or from the board.
//
// Size: this is the largest package below the CLI (about 4,000 lines)
// because it is the one place where the steps meet and where the state
// that carries from round to round lives: the held-out set and its
// reference standard, the stop set, the learning-curve record, the
// settings with their keys and ranges, the consensus and training reports
// and their text forms. Splitting it would spread that state over
// packages that must then share it; what is not the round (export, roll-up,
// planning, curve replays) has moved out to export/ and plan/.
package round

import (
	"errors"
	"fmt"

	"handoff"
	"handoff/crowd"
	"handoff/store"
)

// project is what a step reads from the store: the codebook, every item in
// store order, the labels in column form aligned with those items, and gold.
type project struct {
	cb     handoff.Codebook
	items  []handoff.Item
	index  map[string]int // item id → position in items
	labels *crowd.Labels
	anns   []string // annotator index → id
	gold   []int    // per item: expert class or -1
	golds  []handoff.Gold
	hasG   bool
	// ofTree: the project is one question of a question tree, whose
	// reports leave out the annotators with no label on that question.
	ofTree bool
}

// load reads the project in one read transaction.
func load(st *store.Store) (*project, error) {
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true})
	if err != nil {
		return nil, err
	}
	return projectOf(sn)
}

// projectOf builds the project from a snapshot. Items are in store order;
// labels reference them by position.
//
// In a question tree the project is the first question's (codebook
// cb.Sub(0), its labels only), so that every step of a round works on the
// first question exactly as in a one-question project; follow-up questions
// are combined by QuestionConsensus.
func projectOf(sn *store.Snapshot) (*project, error) {
	tree := sn.Codebook.Tree() || sn.Labels.Tree()
	if sn.Codebook.Tree() {
		sub := *sn
		sub.Codebook = sn.Codebook.Sub(0)
		sub.Labels = sn.Labels.ForQuestion(sn.Codebook, 0)
		sn = &sub
	}
	p := &project{cb: sn.Codebook, items: sn.Items, ofTree: tree}
	p.index = make(map[string]int, len(p.items))
	for i, it := range p.items {
		p.index[it.ID] = i
	}
	t := sn.Labels
	// Map the table's item numbers to positions in p.items.
	pos := make([]int32, len(t.ItemIDs))
	for n, id := range t.ItemIDs {
		j, ok := p.index[id]
		if !ok {
			pos[n] = -1
			continue
		}
		pos[n] = int32(j)
	}
	l := &crowd.Labels{
		NItems:      len(p.items),
		NAnnotators: len(t.AnnotatorIDs),
		NClasses:    len(p.cb.Classes),
		Item:        make([]int32, 0, t.Len()),
		Annotator:   make([]int32, 0, t.Len()),
		Class:       make([]uint8, 0, t.Len()),
		Seconds:     make([]float32, 0, t.Len()),
		Time:        make([]int64, 0, t.Len()),
	}
	if l.NClasses > 255 {
		return nil, fmt.Errorf("codebook has %d classes; at most 255 are supported", l.NClasses)
	}
	for i := range t.Item {
		it := pos[t.Item[i]]
		if it < 0 {
			return nil, fmt.Errorf("label %d names item number %d, which is not in the store; the file may be damaged", i, t.Item[i])
		}
		l.Item = append(l.Item, it)
		l.Annotator = append(l.Annotator, int32(t.Annotator[i]))
		l.Class = append(l.Class, uint8(t.Class[i]))
		if t.Seconds != nil {
			l.Seconds = append(l.Seconds, t.Seconds[i])
		}
		if t.Time != nil {
			l.Time = append(l.Time, t.Time[i])
		}
	}
	if t.Seconds == nil {
		l.Seconds = nil
	}
	if t.Time == nil {
		l.Time = nil
	}
	p.labels = l
	p.anns = t.AnnotatorIDs
	p.golds = sn.Gold
	p.gold = make([]int, len(p.items))
	for i := range p.gold {
		p.gold[i] = -1
	}
	for _, g := range p.golds {
		i, ok := p.index[g.Item]
		if !ok {
			continue
		}
		c, ok := p.cb.Index(g.Class)
		if !ok {
			return nil, fmt.Errorf("gold for item %q has class %q, which is not in the codebook", g.Item, g.Class)
		}
		p.gold[i] = c
		p.hasG = true
	}
	return p, nil
}

// clean applies the cleaning rules (none when noCleaning) to the project's
// labels, screening annotators against gold when the project has any, and
// returns the labels kept, what was dropped, and the gold per item
// position it used (nil without gold).
func (p *project) clean(rules crowd.Rules, noCleaning bool) (*crowd.Labels, *crowd.Cleaning, []int, error) {
	var gold []int
	if p.hasG {
		gold = p.gold
	}
	kept, cl, err := crowd.Clean(p.labels, gold, cleaningRules(rules, noCleaning))
	return kept, cl, gold, err
}

// cleaningRules are the rules, or none when noCleaning.
func cleaningRules(rules crowd.Rules, noCleaning bool) crowd.Rules {
	if noCleaning {
		return crowd.Rules{}
	}
	return rules
}

// withConsensus reads the project and its stored consensus in one read
// transaction, and lays the consensus out per item position: the posterior
// (items × classes, row-major) and the labels it counted per item. It
// returns an error wrapping ErrNothing when no consensus was stored yet.
func withConsensus(st *store.Store) (*project, *store.Snapshot, []float64, []int, error) {
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true})
	if err != nil {
		return nil, nil, nil, nil, err
	}
	p, err := projectOf(sn)
	if err != nil {
		return nil, nil, nil, nil, err
	}
	if sn.ConsensusMeta == nil {
		return nil, nil, nil, nil, fmt.Errorf("%w: no consensus yet; run `loop consensus DIR` first", ErrNothing)
	}
	post, nl := posteriorsOf(p, sn.Consensus)
	return p, sn, post, nl, nil
}

// ErrNothing is returned by a step that has nothing to work on; its message
// says what is missing and what to do.
var ErrNothing = errors.New("nothing to do")
