// Package selector decides which items go to people next, and why.
//
// It scores the model's uncertainty (entropy, margin, least-confidence,
// query-by-committee vote entropy), optionally weights it by density, spreads
// a batch by diversity (greedy k-centre over feature rows) and over predicted
// classes, and mixes the batch over reasons: model-unsure, crowd-split,
// model-vs-crowd conflict, held-out top-up and audit. Every pick carries its
// reason and score.
//
// The package takes plain Go values (probabilities as [][]float64, item
// states, feature rows as a features.Matrix) and returns plain values. It is
// deterministic given a seed.
package selector

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
)

// Strategy names an uncertainty score for the model-unsure part of a batch.
type Strategy string

// The uncertainty strategies. The zero value means Entropy.
const (
	Entropy         Strategy = "entropy"          // −Σ p log p (natural log)
	Margin          Strategy = "margin"           // 1 − (p₁ − p₂), p₁ ≥ p₂ the two largest
	LeastConfidence Strategy = "least-confidence" // 1 − max p
	Committee       Strategy = "committee"        // vote entropy of a committee (query-by-committee)
)

// Strategies lists the strategies in the order a CLI should offer them.
var Strategies = []Strategy{Entropy, Margin, LeastConfidence, Committee}

// ParseStrategy returns the strategy with the given name; "" means Entropy.
func ParseStrategy(s string) (Strategy, error) {
	if s == "" {
		return Entropy, nil
	}
	for _, st := range Strategies {
		if string(st) == s {
			return st, nil
		}
	}
	return "", fmt.Errorf("strategy: unknown %q (want entropy, margin, least-confidence or committee)", s)
}

// checkProba reports an error if p is not a probability vector: every entry
// finite and in [0, 1] (within 1e-9), summing to 1 within 1e-6.
func checkProba(p []float64) error {
	if len(p) < 2 {
		return fmt.Errorf("need at least two class probabilities, have %d", len(p))
	}
	s := 0.0
	for j, v := range p {
		if math.IsNaN(v) || v < -1e-9 || v > 1+1e-9 {
			return fmt.Errorf("probability of class %d is %v, not in [0, 1]", j, v)
		}
		s += v
	}
	if math.Abs(s-1) > 1e-6 {
		return fmt.Errorf("probabilities sum to %v, not 1", s)
	}
	return nil
}

// EntropyScore returns the Shannon entropy H(p) = −Σ_j p_j ln p_j of a
// probability vector, with 0 ln 0 = 0. It is 0 for a certain prediction and
// ln K for the uniform one over K classes.
func EntropyScore(p []float64) float64 {
	h := 0.0
	for _, v := range p {
		if v > 0 {
			h -= v * math.Log(v)
		}
	}
	return h
}

// MarginScore returns 1 − (p₁ − p₂), where p₁ ≥ p₂ are the two largest
// entries of p: 0 for a certain prediction, 1 for a tie at the top. p must
// have at least two entries.
func MarginScore(p []float64) float64 {
	if len(p) < 2 {
		panic("selector: MarginScore needs at least two probabilities")
	}
	a, b := math.Inf(-1), math.Inf(-1)
	for _, v := range p {
		if v > a {
			a, b = v, a
		} else if v > b {
			b = v
		}
	}
	return 1 - (a - b)
}

// LeastConfidenceScore returns 1 − max_j p_j.
func LeastConfidenceScore(p []float64) float64 {
	m := math.Inf(-1)
	for _, v := range p {
		m = math.Max(m, v)
	}
	return 1 - m
}

// VoteEntropy returns, for each item, the vote entropy of a committee
// (Dagan & Engelson 1995; Settles 2009, eq. 2.4):
//
//	VE(x) = −Σ_c (V(c)/M) ln(V(c)/M)
//
// where M is the number of members and V(c) the number of members whose most
// probable class (Argmax) for x is c. committee[m][i] is member m's
// probability vector for item i; every member must cover the same items
// (length mismatch panics). It returns an error naming the member and item
// whose row is not a probability vector.
func VoteEntropy(committee [][][]float64) ([]float64, error) {
	if len(committee) == 0 {
		return nil, fmt.Errorf("committee: no members")
	}
	n := len(committee[0])
	for m := range committee {
		if len(committee[m]) != n {
			panic(fmt.Sprintf("selector: committee member %d has %d items, member 0 has %d", m, len(committee[m]), n))
		}
	}
	out := make([]float64, n)
	M := float64(len(committee))
	var votes []int
	for i := 0; i < n; i++ {
		k := len(committee[0][i])
		if cap(votes) < k {
			votes = make([]int, k)
		}
		votes = votes[:k]
		clear(votes)
		for m := range committee {
			p := committee[m][i]
			if len(p) != k {
				panic(fmt.Sprintf("selector: committee member %d item %d has %d classes, want %d", m, i, len(p), k))
			}
			if err := checkProba(p); err != nil {
				return nil, fmt.Errorf("committee member %d, item %d: %w", m, i, err)
			}
			votes[floats.MaxIdx(p)]++
		}
		h := 0.0
		for _, v := range votes {
			if v > 0 {
				q := float64(v) / M
				h -= q * math.Log(q)
			}
		}
		out[i] = h
	}
	return out, nil
}

// Scores returns the uncertainty score of every row of proba under strategy
// st (Entropy, Margin or LeastConfidence; "" means Entropy); higher means
// more uncertain. Use VoteEntropy for Committee. It returns an error naming
// the first row that is not a probability vector.
func Scores(st Strategy, proba [][]float64) ([]float64, error) {
	var f func([]float64) float64
	switch st {
	case "", Entropy:
		f = EntropyScore
	case Margin:
		f = MarginScore
	case LeastConfidence:
		f = LeastConfidenceScore
	default:
		return nil, fmt.Errorf("strategy: %q has no single-model score (committee needs VoteEntropy)", st)
	}
	out := make([]float64, len(proba))
	for i, p := range proba {
		if err := checkProba(p); err != nil {
			return nil, fmt.Errorf("item %d: %w", i, err)
		}
		out[i] = f(p)
	}
	return out, nil
}
