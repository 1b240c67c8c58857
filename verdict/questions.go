package verdict

import (
	"fmt"
	"strings"
)

// QuestionSummary is one question of a question tree as a report shows it
// beside the detail, which is the first question's: each question has its
// own machine and its own verdict (GO per question). Attached when the
// report is shown; it never enters the first question's decision.
type QuestionSummary struct {
	Key    string   `json:"key"`
	Parent string   `json:"parent,omitempty"` // the question whose answer asks it
	When   []string `json:"when,omitempty"`   // the parent answers that ask it
	// Items are the items with a consensus for the question, Uncertain
	// those of them below the consensus's uncertainty level.
	Items     int `json:"items"`
	Uncertain int `json:"uncertain"`
	// Alpha is the crowd's Krippendorff's alpha on the question (under
	// AlphaMetric: ordinal for an ordinal question, nominal otherwise); nil
	// when it cannot be estimated.
	Alpha       *float64 `json:"alpha,omitempty"`
	AlphaMetric string   `json:"alpha_metric,omitempty"`
	// Machine is the question's model ("" none yet); CV its
	// cross-validated accuracy against the consensus.
	Machine string  `json:"machine,omitempty"`
	CV      float64 `json:"cv_accuracy,omitempty"`
	// Verdict is the question's own verdict, nil while it cannot be
	// judged (Why says why).
	Verdict *Report `json:"verdict,omitempty"`
	Why     string  `json:"why,omitempty"`
}

// Decision is "GO", "NOT YET", or "no verdict yet".
func (q QuestionSummary) Decision() string {
	switch {
	case q.Verdict == nil:
		return "no verdict yet"
	case q.Verdict.Decision.Go:
		return "GO"
	}
	return "NOT YET"
}

// Lines returns the question's figures in words, one per line: its
// place in the tree, consensus, agreement, machine and verdict.
func (q QuestionSummary) Lines() []string {
	var out []string
	place := "the first question"
	if q.Parent != "" {
		place = fmt.Sprintf("asked when %s is %s", q.Parent, strings.Join(q.When, " or "))
	}
	out = append(out, fmt.Sprintf("%s (%s): %d items with a consensus, %d of them uncertain", q.Key, place, q.Items, q.Uncertain))
	if q.Alpha != nil {
		out = append(out, fmt.Sprintf("crowd agreement: Krippendorff's alpha (%s) %.3f", q.AlphaMetric, *q.Alpha))
	} else {
		out = append(out, "crowd agreement: no estimate yet (too few items with two labels or more)")
	}
	if q.Machine == "" {
		out = append(out, "machine: none yet")
	} else {
		m := fmt.Sprintf("machine %s: cross-validated accuracy %.3f", q.Machine, q.CV)
		if q.Verdict != nil && q.Verdict.Agreement.N > 0 {
			m += fmt.Sprintf("; held-out accuracy %s (n = %d)", iv(q.Verdict.Agreement.Accuracy), q.Verdict.Agreement.N)
		}
		out = append(out, m)
	}
	if q.Verdict == nil {
		out = append(out, "verdict: "+q.Why)
	} else {
		out = append(out, "verdict: "+q.Verdict.Headline())
		for _, r := range q.Verdict.Decision.Reasons {
			out = append(out, "  why: "+r)
		}
	}
	return out
}
