package crowd

import (
	"fmt"
	"math"
	"slices"
)

// Candidate is one model's held-out score in a Choice.
type Candidate struct {
	Method string `json:"method"`
	// LogLik is the mean log-probability of a held-out label,
	// (1/H) Σ_j log Σ_t T⁻_it π⁻_a[t][c], where T⁻ and π⁻ are fitted
	// without the label's fold (a probability below 1e-6 counts as 1e-6).
	LogLik float64 `json:"loglik"`
	// Diff is LogLik minus the hierarchical model's, and SE its standard
	// error from the paired per-label differences, sd/√H.
	Diff      float64 `json:"diff"`
	SE        float64 `json:"se"`
	Converged bool    `json:"converged"`
}

// Choice says which model MethodAuto used and why.
type Choice struct {
	Chosen     string      `json:"chosen"`
	Reason     string      `json:"reason"`
	Candidates []Candidate `json:"candidates,omitempty"`
	// HeldOut is the number of labels scored; SampleItems the number of
	// items the choice was made on (all, unless there were more than
	// autoMaxLabels labels).
	HeldOut     int `json:"held_out"`
	SampleItems int `json:"sample_items"`
	// MedianLabels is the median number of labels per annotator with labels.
	MedianLabels float64 `json:"median_labels"`
	// Warning is set when annotators are too sparse for a full confusion
	// matrix (median labels below K², the matrix's cells).
	Warning string `json:"warning,omitempty"`
}

const (
	autoFolds     = 5       // labels are hashed into this many folds …
	autoScored    = 2       // … of which this many are held out in turn
	autoMaxLabels = 1 << 20 // above this the choice is made on a sample of items
	autoMinHeld   = 30      // fewer held-out labels than this: no choice is made
)

// Auto combines with the hierarchical model unless the labels show another
// model predicts held-out labels clearly better. Labels are hashed (by Seed
// and position) into 5 folds; for each of 2 folds every candidate (majority
// vote as a model, one-coin, the hierarchical model, plain Dawid–Skene) is
// fitted on the other labels and scores each held-out label by
// log Σ_t T_it π_a[t][c]. Majority vote enters as its vote shares and its
// annotator confusion against the majority class, both with a pseudo-count
// of ½. A candidate replaces the hierarchical model only if its mean score is
// higher by more than two standard errors of the paired differences: the
// hierarchical model is the default because it adapts to sparse and dense
// crowds alike, and a change needs evidence. With more than 1,048,576
// labels the choice is made on a pseudo-random sample of items holding about
// that many. Result.Choice records the scores, the reason and a warning when
// annotators are too sparse for full matrices.
func Auto(l *Labels, o Options) (*Result, error) {
	if err := checkInput(l, o); err != nil {
		return nil, err
	}
	ch, err := choose(l, o)
	if err != nil {
		return nil, err
	}
	r, err := Combine(ch.Chosen, l, o)
	if err != nil {
		return nil, err
	}
	if !r.Converged && r.Method != MethodMajority {
		ch.Reason += fmt.Sprintf("; EM did not converge in %d iterations (the posteriors are those of the last iteration)", r.Iterations)
	}
	r.Choice = ch
	return r, nil
}

func choose(l *Labels, o Options) (*Choice, error) {
	k := l.NClasses
	ch := &Choice{Chosen: MethodHierarchical, SampleItems: l.NItems}
	per := make([]int, l.NAnnotators)
	for _, a := range l.Annotator {
		per[a]++
	}
	var counts []int
	for _, n := range per {
		if n > 0 {
			counts = append(counts, n)
		}
	}
	slices.Sort(counts)
	if len(counts) > 0 {
		m := len(counts)
		ch.MedianLabels = float64(counts[(m-1)/2]+counts[m/2]) / 2
	}
	if ch.MedianLabels < float64(k*k) {
		ch.Warning = fmt.Sprintf("annotators are too sparse for a full confusion matrix each: the median annotator gave %s labels, a %d×%d matrix has %d cells", trimFloat(ch.MedianLabels), k, k, k*k)
	}
	// A sample of items when there are many labels.
	ls := l
	gold := o.Gold
	if l.Len() > autoMaxLabels {
		keepFrac := float64(autoMaxLabels) / float64(l.Len())
		keep := make([]bool, l.NItems)
		ch.SampleItems = 0
		for i := range keep {
			keep[i] = float64(mix64(o.Seed^0xa5a5, uint64(i))>>11)/(1<<53) < keepFrac
			if keep[i] {
				ch.SampleItems++
			}
		}
		ls = l.Subset(func(j int) bool { return keep[l.Item[j]] })
	}
	methods := []string{MethodHierarchical, MethodMajority, MethodOneCoin, MethodDawidSkene}
	score := make([][]float64, len(methods))
	conv := make([]bool, len(methods))
	for m := range conv {
		conv[m] = true
	}
	fold := make([]uint8, ls.Len())
	for j := range fold {
		fold[j] = uint8(mix64(o.Seed^0x5eed, uint64(j)) % autoFolds)
	}
	for f := 0; f < autoScored; f++ {
		var held []int
		for j := range fold {
			if fold[j] == uint8(f) {
				held = append(held, j)
			}
		}
		train := ls.Subset(func(j int) bool { return fold[j] != uint8(f) })
		if len(held) == 0 {
			continue
		}
		for m, method := range methods {
			oo := o
			oo.Gold = gold
			// A looser stop for the candidates' fits: their held-out scores
			// settle long before the parameters do (hierarchical on 800,000
			// labels: 17 iterations instead of 39, scores within 1e-5).
			oo.Tol = max(o.Tol, 1e-6)
			if method == MethodMajority {
				oo.Smoothing = 0.5
			}
			r, err := Combine(method, train, oo)
			if err != nil {
				return nil, fmt.Errorf("choosing a model: fitting %s: %w", method, err)
			}
			conv[m] = conv[m] && (r.Converged || method == MethodMajority)
			post := r.Posterior
			if method == MethodMajority {
				post = smoothShares(r, 0.5)
			}
			for _, j := range held {
				i, a, c := int(ls.Item[j]), int(ls.Annotator[j]), int(ls.Class[j])
				var p float64
				for t := 0; t < k; t++ {
					p += post[i*k+t] * r.Confusion[(a*k+t)*k+c]
				}
				score[m] = append(score[m], math.Log(max(p, 1e-6)))
			}
		}
	}
	h := len(score[0])
	ch.HeldOut = h
	if h < autoMinHeld {
		ch.Reason = fmt.Sprintf("only %d held-out labels, too few to compare models (need %d): hierarchical, the default", h, autoMinHeld)
		return ch, nil
	}
	best, bestDiff := 0, 0.0
	for m, method := range methods {
		var mean, md float64
		for j := 0; j < h; j++ {
			mean += score[m][j]
			md += score[m][j] - score[0][j]
		}
		mean /= float64(h)
		md /= float64(h)
		var ss float64
		for j := 0; j < h; j++ {
			d := score[m][j] - score[0][j] - md
			ss += d * d
		}
		se := 0.0
		if h > 1 {
			se = math.Sqrt(ss / float64(h-1) / float64(h))
		}
		ch.Candidates = append(ch.Candidates, Candidate{Method: method, LogLik: mean, Diff: md, SE: se, Converged: conv[m]})
		if m > 0 && md > 2*se && md > bestDiff {
			best, bestDiff = m, md
		}
	}
	if best == 0 {
		ch.Reason = "hierarchical, the default: no other model predicts held-out labels better by more than 2 standard errors"
	} else {
		c := ch.Candidates[best]
		ch.Chosen = methods[best]
		ch.Reason = fmt.Sprintf("%s predicts held-out labels better than hierarchical by %.4f ± %.4f nats a label (more than 2 standard errors)", c.Method, c.Diff, c.SE)
	}
	return ch, nil
}

// smoothShares returns majority vote's posteriors as vote shares with a
// pseudo-count α per class (items without labels keep the prior).
func smoothShares(r *Result, alpha float64) []float64 {
	k := r.NClasses
	out := append([]float64(nil), r.Posterior...)
	for i := 0; i < r.NItems; i++ {
		n := float64(r.NLabels[i])
		if n == 0 || (r.IsGold != nil && r.IsGold[i]) {
			continue
		}
		row := out[i*k : (i+1)*k]
		for c := range row {
			row[c] = (row[c]*n + alpha) / (n + float64(k)*alpha)
		}
	}
	return out
}

func trimFloat(x float64) string {
	if x == math.Trunc(x) {
		return fmt.Sprintf("%.0f", x)
	}
	return fmt.Sprintf("%.1f", x)
}
