package round

import (
	"errors"
	"fmt"
	"strings"

	"handoff/store"
	"handoff/verdict"
)

// QuestionFigures is one question of a project's codebook as the board, the
// API and the reports show it: where it sits in the tree, how many labels
// and items it has, its stored consensus and, once a round has judged it,
// its verdict. A one-question project has one entry.
type QuestionFigures struct {
	Key      string   `json:"key"`
	Question string   `json:"question"`
	Scale    string   `json:"scale"`            // "nominal" or "ordinal"
	Classes  []string `json:"classes"`          // class keys
	Parent   string   `json:"parent,omitempty"` // the question its condition is on ("" for the first)
	When     []string `json:"when,omitempty"`   // the parent answers that ask it
	Labels   int      `json:"labels"`           // stored labels of this question
	Items    int      `json:"items"`            // items with at least one label of it
	// Consensus is the stored consensus's report, nil before one is
	// computed; Uncertain and NotAsked are in it.
	Consensus *ConsensusReport `json:"consensus,omitempty"`
	// Verdict is this question's verdict in the latest round ("GO",
	// "NOT YET"), empty when no round has judged the question; Why says why
	// a question has no verdict or what the verdict rests on.
	Verdict string `json:"verdict,omitempty"`
	Why     string `json:"why,omitempty"`
}

// Questions returns the figures of every question of the project's
// codebook, first question first (the order of cb.All()).
func Questions(st *store.Store) ([]QuestionFigures, error) {
	cb := st.Codebook()
	sn, err := st.Snapshot(store.SnapshotOptions{})
	if err != nil {
		return nil, err
	}
	all := cb.All()
	out := make([]QuestionFigures, len(all))
	for q, x := range all {
		f := QuestionFigures{Key: x.Key, Question: x.Question, Scale: string(x.Scale)}
		if f.Key == "" {
			f.Key = cb.FirstKey()
		}
		if f.Scale == "" {
			f.Scale = "nominal"
		}
		for _, c := range x.Classes {
			f.Classes = append(f.Classes, c.Key)
		}
		if p := cb.Parent(q); p >= 0 {
			f.Parent = all[p].Key
			if x.When != nil {
				f.When = append([]string(nil), x.When.In...)
			}
		}
		t := sn.Labels
		if cb.Tree() {
			t = sn.Labels.ForQuestion(cb, q)
		}
		f.Labels = t.Len()
		seen := map[uint32]bool{}
		for _, it := range t.Item {
			seen[it] = true
		}
		f.Items = len(seen)
		_, rep, err := StoredQuestionConsensus(st, all[q].Key)
		switch {
		case errors.Is(err, ErrNothing):
		case err != nil:
			return nil, err
		default:
			f.Consensus = rep
		}
		out[q] = f
	}
	r, err := Latest(st)
	if err != nil || r == nil {
		return out, nil
	}
	if len(r.Questions) == 0 && r.Verdict != nil && len(out) > 0 {
		out[0].Verdict, out[0].Why = verdictWords(r.Verdict)
	}
	for _, qr := range r.Questions {
		q, ok := cb.QuestionIndex(qr.Key)
		if !ok || q >= len(out) {
			continue
		}
		if qr.Verdict == nil {
			out[q].Why = qr.Why
			continue
		}
		out[q].Verdict, out[q].Why = verdictWords(qr.Verdict)
	}
	// A question added since the latest round has not been judged.
	for q := range out {
		if out[q].Verdict == "" && out[q].Why == "" {
			out[q].Why = fmt.Sprintf("no verdict yet: no round has judged %q since it was added; run `loop round DIR`", out[q].Key)
		}
	}
	return out, nil
}

// verdictWords returns a verdict's decision ("GO", "NOT YET") and what it
// rests on: the threshold and bound for GO, the first reason otherwise.
func verdictWords(v *verdict.Report) (string, string) {
	d := v.Decision
	if d.Go {
		return "GO", fmt.Sprintf("error bound %.3g ≤ max-error %.3g at threshold %.3g", d.Bound, v.Settings.MaxError, d.Threshold)
	}
	return "NOT YET", strings.Join(d.Reasons, "; ")
}
