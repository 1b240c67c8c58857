package selector

import (
	"fmt"
	"math"
)

// TreeQuestion is one question of a question tree, for TreeUncertainty.
// Questions are listed so that every parent comes before its follow-ups.
type TreeQuestion struct {
	// Parent is the position of the question whose answer asks this one,
	// -1 for the first question (and for an unconditional follow-up, which
	// every item reaches).
	Parent int
	// In are the parent's classes that ask this question (ignored when
	// Parent is -1).
	In []int
	// K is the number of classes.
	K int
}

// TreeUncertainty returns an item's uncertainty over a question tree,
//
//	U = Σ_q R_q·H_q,
//
// where H_q = −Σ_j p_qj ln p_qj is the entropy of question q's machine
// probabilities p_q for the item, and R_q the probability that the item
// reaches q: R_q = 1 for a question without a parent, and
// R_q = R_parent · Σ_{c ∈ In} p_parent,c otherwise. A question without a
// machine (proba[q] nil) counts at its largest entropy, H_q = ln K_q, and
// its answer is taken as uniform for its follow-ups
// (Σ_{c ∈ In} p_parent,c = |In|/K_parent). For a one-question tree U is the
// entropy of EntropyScore.
func TreeUncertainty(tree []TreeQuestion, proba [][]float64) (float64, error) {
	if len(proba) != len(tree) {
		return 0, fmt.Errorf("%d probability vectors for %d questions", len(proba), len(tree))
	}
	reach := make([]float64, len(tree))
	u := 0.0
	for q, x := range tree {
		if x.K < 2 {
			return 0, fmt.Errorf("question %d: %d classes, need at least two", q, x.K)
		}
		reach[q] = 1
		if x.Parent >= 0 {
			if x.Parent >= q {
				return 0, fmt.Errorf("question %d: parent %d is not listed before it", q, x.Parent)
			}
			pp := proba[x.Parent]
			s := 0.0
			for _, c := range x.In {
				if c < 0 || c >= tree[x.Parent].K {
					return 0, fmt.Errorf("question %d: condition class %d outside the parent's %d classes", q, c, tree[x.Parent].K)
				}
				if pp == nil {
					s += 1 / float64(tree[x.Parent].K)
				} else {
					s += pp[c]
				}
			}
			reach[q] = reach[x.Parent] * s
		}
		h := math.Log(float64(x.K))
		if p := proba[q]; p != nil {
			if len(p) != x.K {
				return 0, fmt.Errorf("question %d: %d probabilities for %d classes", q, len(p), x.K)
			}
			if err := checkProba(p); err != nil {
				return 0, fmt.Errorf("question %d: %w", q, err)
			}
			h = EntropyScore(p)
		}
		u += reach[q] * h
	}
	return u, nil
}
