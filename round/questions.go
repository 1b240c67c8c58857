package round

import (
	"errors"
	"fmt"
	"strings"

	"handoff"
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

// UnknownQuestion is the error of a question key the codebook does not
// have; it names the questions it has.
type UnknownQuestion struct {
	Key  string
	Keys []string
}

func (e *UnknownQuestion) Error() string {
	return fmt.Sprintf("--question %q: not a question of the codebook (questions: %s)", e.Key, strings.Join(e.Keys, ", "))
}

// EachQuestion runs report on the question named key, or, when key is "",
// on every question of cb with parents before their follow-ups
// (QuestionOrder). It returns the one report, or the reports in that order
// when there are several, and their text: in a question tree, each
// question's section is headed by its key and when it is asked. report
// gets the question's key and returns its report and text.
func EachQuestion[R any](cb handoff.Codebook, key string, report func(key string) (R, string, error)) (any, string, error) {
	qs := QuestionOrder(cb)
	if key != "" {
		q, ok := cb.QuestionIndex(key)
		if !ok {
			e := &UnknownQuestion{Key: key}
			for _, x := range cb.All() {
				e.Keys = append(e.Keys, x.Key)
			}
			return nil, "", e
		}
		qs = []int{q}
	}
	var (
		reps []R
		text strings.Builder
	)
	for _, q := range qs {
		r, t, err := report(cb.All()[q].Key)
		if err != nil {
			return nil, "", err
		}
		reps = append(reps, r)
		if cb.Tree() {
			text.WriteString(questionHeader(cb, q, text.Len() > 0))
		}
		text.WriteString(t)
	}
	if len(reps) == 1 {
		return reps[0], text.String(), nil
	}
	return reps, text.String(), nil
}

// questionHeader names question q of a tree and when it is asked, as the
// first line of its section (after a blank line when gap).
func questionHeader(cb handoff.Codebook, q int, gap bool) string {
	var b strings.Builder
	if gap {
		b.WriteString("\n")
	}
	x := cb.All()[q]
	fmt.Fprintf(&b, "question %s", x.Key)
	if p := cb.Parent(q); p >= 0 {
		fmt.Fprintf(&b, " (asked when %s is %s)", cb.All()[p].Key, strings.Join(x.When.In, " or "))
	} else if q > 0 {
		b.WriteString(" (asked of every item)")
	}
	b.WriteString(":\n")
	return b.String()
}
