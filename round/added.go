package round

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"slices"

	"handoff/store"
)

// addedAsks returns the asks of the questions added to the codebook since
// the latest round (absent from its Questions) that its batch does not ask
// yet: every item of the round's kind people labelled whose stored parent
// consensus calls for the question (every such item for an unconditional
// one), held-out members first, the others in a seeded random order, each
// asking only the added questions. Nil for a one-question project or when
// nothing was added.
func (c *current) addedAsks() ([]BatchItem, error) {
	cb := c.sn.Codebook
	if !cb.Tree() || c.s.HeldOut == nil {
		return nil, nil
	}
	judged := map[string]bool{}
	for _, q := range c.r.Questions {
		judged[q.Key] = true
	}
	if len(c.r.Questions) == 0 {
		judged[cb.FirstKey()] = true
	}
	for _, b := range c.batch {
		for _, k := range b.Questions {
			judged[k] = true // asked already
		}
	}
	all := cb.All()
	n := len(c.p.items)
	counts := c.labelCounts()
	need := make([][]string, n)
	for _, q := range QuestionOrder(cb) {
		x := all[q]
		if q == 0 || judged[x.Key] {
			continue
		}
		labelled := make([]bool, n)
		t := c.sn.Labels.ForQuestion(cb, q)
		for _, it := range t.Item {
			if i, ok := c.p.index[t.ItemIDs[it]]; ok {
				labelled[i] = true
			}
		}
		var parent map[string]string
		if p := cb.Parent(q); p >= 0 {
			cs := c.sn.Consensus
			if p > 0 {
				b := c.sn.State[questionState(all[p].Key)]
				if b == nil {
					continue // its parent has no consensus yet: asked with it
				}
				var sq storedQuestion
				if err := json.Unmarshal(b, &sq); err != nil {
					return nil, fmt.Errorf("reading the consensus of question %q: %w", all[p].Key, err)
				}
				cs = sq.Consensus
			}
			parent = map[string]string{}
			for _, x := range cs {
				if x.Labels > 0 {
					parent[x.Item] = x.Class
				}
			}
		}
		for i, it := range c.p.items {
			if it.Kind != c.s.HeldOut.Kind || labelled[i] || counts[i] == 0 && c.p.gold[i] < 0 {
				continue
			}
			if parent != nil && !slices.Contains(x.When.In, parent[it.ID]) {
				continue
			}
			need[i] = append(need[i], x.Key)
		}
	}
	var heldOut, rest []int
	for i, ks := range need {
		switch {
		case len(ks) == 0:
		case c.s.HeldOut.member(c.p.items[i]):
			heldOut = append(heldOut, i)
		default:
			rest = append(rest, i)
		}
	}
	if len(heldOut)+len(rest) == 0 {
		return nil, nil
	}
	r := rand.New(rand.NewPCG(c.r.Config.Seed+1000003*uint64(c.r.Round), 0xadd))
	for _, s := range [][]int{heldOut, rest} {
		r.Shuffle(len(s), func(a, b int) { s[a], s[b] = s[b], s[a] })
	}
	var out []BatchItem
	for _, i := range slices.Concat(heldOut, rest) {
		it := c.p.items[i]
		out = append(out, BatchItem{Item: it.ID, Reason: ReasonQuestion, Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent, Questions: need[i]})
	}
	return out, nil
}

// withAdded puts the asks of questions added since the latest round into
// its batch (withAsks) and stores the batch as the round's, so that the
// board hands out the same items; the batch as it was when nothing was
// added.
func (c *current) withAdded(st *store.Store, source string) ([]BatchItem, error) {
	asks, err := c.addedAsks()
	if err != nil || len(asks) == 0 {
		return c.batch, err
	}
	batch := withAsks(c.batch, asks, c.r.Config.Batch)
	b, err := json.Marshal(batch)
	if err != nil {
		return nil, err
	}
	var keys []string
	for _, a := range asks {
		for _, k := range a.Questions {
			if !slices.Contains(keys, k) {
				keys = append(keys, k)
			}
		}
	}
	err = st.CommitRound(store.RoundWrite{Round: c.r.Round, Selection: b, Action: "selection.put",
		Detail: fmt.Sprintf("round %d's batch asks the question(s) added since, %v, on items labelled for the others: %d items", c.r.Round, keys, len(batch))}, source)
	return batch, err
}
