package crowd

import "fmt"

// RuleSpammer is the name of the spammer rule in Drop.Rule.
const RuleSpammer = "spammer"

// SpammerScore is Raykar & Yu's (2012, JMLR 13, eq. 12) spammer score of a
// confusion matrix π (K×K, [true][given], rows summing to 1):
//
//	S = 1/(K(K−1)) Σ_{c<c'} Σ_k (π[c][k] − π[c'][k])²,
//
// the mean squared distance between its rows. An annotator whose answers do
// not depend on the truth (every row the same: random answers or always one
// class) scores 0; a perfect one scores 1.
func SpammerScore(conf []float64, k int) float64 {
	if len(conf) != k*k {
		panic(fmt.Sprintf("crowd: SpammerScore: confusion has %d entries, want %d", len(conf), k*k))
	}
	var s float64
	for c := 0; c < k; c++ {
		for d := c + 1; d < k; d++ {
			for j := 0; j < k; j++ {
				x := conf[c*k+j] - conf[d*k+j]
				s += x * x
			}
		}
	}
	return s / float64(k*(k-1))
}

// SpammerScores returns every annotator's spammer score in r.
func SpammerScores(r *Result) []float64 {
	k := r.NClasses
	out := make([]float64, r.NAnnotators)
	for a := range out {
		out[a] = SpammerScore(r.Confusion[a*k*k:(a+1)*k*k], k)
	}
	return out
}

// DropSpammers applies the spammer rule of rules to l given a consensus r
// computed from l: every annotator with at least rules.SpammerMinLabels labels
// in l whose spammer score in r is below rules.SpammerBelow loses all their
// labels. It returns the labels kept, the drops and the rule's summary; with
// the rule off it returns l itself. The rule needs a consensus, so Clean does
// not apply it: combine, drop, combine again.
func DropSpammers(l *Labels, r *Result, rules Rules) (*Labels, []Drop, RuleSummary) {
	sum := RuleSummary{Rule: RuleSpammer, On: rules.Spammers}
	if !rules.Spammers {
		return l, nil, sum
	}
	per := make([]int, l.NAnnotators)
	for _, a := range l.Annotator {
		per[a]++
	}
	score := SpammerScores(r)
	drop := make([]bool, l.NAnnotators)
	var drops []Drop
	for a := range drop {
		if per[a] >= rules.SpammerMinLabels && per[a] > 0 && score[a] < rules.SpammerBelow {
			drop[a] = true
			drops = append(drops, Drop{Rule: RuleSpammer, Label: -1, Annotator: a, Labels: per[a],
				Reason: fmt.Sprintf("spammer score %.3f below %.3f over %d labels: their answers hardly depend on the item", score[a], rules.SpammerBelow, per[a])})
			sum.Annotators++
			sum.Labels += per[a]
		}
	}
	if sum.Annotators == 0 {
		return l, nil, sum
	}
	out := l.Subset(func(j int) bool { return !drop[l.Annotator[j]] })
	return out, drops, sum
}
