package learner

import (
	"fmt"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
)

// groupRows lists each group's rows, the groups in first-seen order.
// groups == nil puts every row in a group of its own.
func groupRows(n int, groups []string) [][]int {
	if groups == nil {
		out := make([][]int, n)
		for i := range out {
			out[i] = []int{i}
		}
		return out
	}
	if len(groups) != n {
		panic(fmt.Sprintf("learner: %d group ids for %d rows", len(groups), n))
	}
	at := map[string]int{}
	var out [][]int
	for i, g := range groups {
		p, ok := at[g]
		if !ok {
			p = len(out)
			at[g] = p
			out = append(out, nil)
		}
		out[p] = append(out[p], i)
	}
	return out
}

// GroupKFold splits rows 0..n−1 into k folds that never split a group:
// all rows with the same groups[i] (the item's parent) land in the same
// fold. groups == nil treats every row as its own group; otherwise
// len(groups) == n. Groups are shuffled with a PCG generator seeded by seed,
// then, largest first (ties keep the shuffled order), each goes to the fold
// with the fewest rows so far (the lowest index on ties), so the folds are
// balanced in rows. It returns each fold's rows in increasing order, or an
// error if there are fewer groups than folds or k < 2.
func GroupKFold(n int, groups []string, k int, seed uint64) ([][]int, error) {
	if k < 2 {
		return nil, fmt.Errorf("learner: %d folds: need at least 2", k)
	}
	gs := groupRows(n, groups)
	if len(gs) < k {
		return nil, fmt.Errorf("learner: %d groups cannot fill %d folds: use fewer folds or more parents", len(gs), k)
	}
	rng := rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15))
	rng.Shuffle(len(gs), func(a, b int) { gs[a], gs[b] = gs[b], gs[a] })
	slices.SortStableFunc(gs, func(a, b []int) int { return len(b) - len(a) })
	folds := make([][]int, k)
	for _, g := range gs {
		f := 0
		for c := 1; c < k; c++ {
			if len(folds[c]) < len(folds[f]) {
				f = c
			}
		}
		folds[f] = append(folds[f], g...)
	}
	for _, f := range folds {
		slices.Sort(f)
	}
	return folds, nil
}

// GroupSplit splits rows 0..n−1 into training and validation rows without
// splitting a group (see GroupKFold for groups). Groups are shuffled with a
// PCG generator seeded by seed and moved to the validation side, in that
// order, until it holds at least ⌈valFrac·n⌉ rows. Both sides are returned
// in increasing order. It returns an error unless 0 < valFrac < 1 and both
// sides end up non-empty.
func GroupSplit(n int, groups []string, valFrac float64, seed uint64) (train, val []int, err error) {
	if !(valFrac > 0 && valFrac < 1) {
		return nil, nil, fmt.Errorf("learner: validation share %v: must be between 0 and 1", valFrac)
	}
	gs := groupRows(n, groups)
	rng := rand.New(rand.NewPCG(seed, 0x9e3779b97f4a7c15))
	rng.Shuffle(len(gs), func(a, b int) { gs[a], gs[b] = gs[b], gs[a] })
	want := int(valFrac*float64(n) + 0.999999999)
	for _, g := range gs {
		if len(val) < want {
			val = append(val, g...)
		} else {
			train = append(train, g...)
		}
	}
	if len(train) == 0 || len(val) == 0 {
		return nil, nil, fmt.Errorf("learner: %d rows in %d groups cannot be split %v/%v: one side would be empty", n, len(gs), 1-valFrac, valFrac)
	}
	slices.Sort(train)
	slices.Sort(val)
	return train, val, nil
}

// CVResult holds k-fold cross-validation figures. Each row is scored by the
// model fitted without its fold; its label is its most probable target class
// (argmax, first on ties), its prediction the most probable predicted class.
// Accuracy is the share of rows predicted right; MacroF1 the unweighted mean
// over classes of F1 = 2·TP / (2·TP + FP + FN), taken over the classes that
// occur as a label or a prediction (scikit-learn's f1_score(average =
// "macro")); ECE is ECE(Proba, labels). Proba holds each row's out-of-fold
// probabilities. Rows are unweighted in the figures.
type CVResult struct {
	Folds    int
	Accuracy float64
	MacroF1  float64
	ECE      float64
	Proba    [][]float64
}

// CrossValidate fits l on k−1 folds of GroupKFold(X.Rows(), groups, k,
// seed) and scores the held-out fold, k times, and returns the pooled
// figures. targets, weights and groups follow Fit and GroupKFold.
//
// A fold's model is fitted on the classes its training rows have (target
// mass above 1e-9): each training row's targets are restricted to those
// classes and renormalised — spread evenly over them if the row has no
// mass there — and the model gives probability 0 to the classes it never
// saw. A fold whose training rows have fewer than two classes is an error
// naming the fold.
func CrossValidate(l Learner, X features.Matrix, targets [][]float64, weights []float64, groups []string, k int, seed uint64) (CVResult, error) {
	nc := checkShape(X, targets, weights)
	n := X.Rows()
	if n == 0 {
		return CVResult{}, ErrEmpty
	}
	folds, err := GroupKFold(n, groups, k, seed)
	if err != nil {
		return CVResult{}, err
	}
	proba := make([][]float64, n)
	inFold := make([]bool, n)
	for f, test := range folds {
		clear(inFold)
		for _, i := range test {
			inFold[i] = true
		}
		train := make([]int, 0, n-len(test))
		for i := 0; i < n; i++ {
			if !inFold[i] {
				train = append(train, i)
			}
		}
		mass := make([]float64, nc)
		for _, i := range train {
			floats.Add(mass, targets[i])
		}
		var cls []int
		for c, m := range mass {
			if m > 1e-9 {
				cls = append(cls, c)
			}
		}
		if len(cls) < 2 {
			return CVResult{}, fmt.Errorf("learner: cross-validation fold %d of %d: its training rows all have one class; label more items of other classes", f+1, k)
		}
		tt := make([][]float64, len(train))
		for a, i := range train {
			t := make([]float64, len(cls))
			for b, c := range cls {
				t[b] = targets[i][c]
			}
			sum := 0.0
			for _, v := range t {
				sum += v
			}
			if sum > 0 {
				for b := range t {
					t[b] /= sum
				}
			} else {
				// All of this row's mass is on classes the fold lacks.
				for b := range t {
					t[b] = 1 / float64(len(t))
				}
			}
			tt[a] = t
		}
		m, err := l.Fit(Subset(X, train), tt, subsetWeights(weights, train))
		if err != nil {
			return CVResult{}, fmt.Errorf("learner: cross-validation fold %d of %d: %w", f+1, k, err)
		}
		p := m.PredictProba(Subset(X, test))
		for r, i := range test {
			row := make([]float64, nc)
			for b, c := range cls {
				row[c] = p[r][b]
			}
			proba[i] = row
		}
	}
	labels := make([]int, n)
	pred := make([]int, n)
	for i := range labels {
		labels[i], pred[i] = floats.MaxIdx(targets[i]), floats.MaxIdx(proba[i])
	}
	acc, f1 := AccuracyF1(labels, pred, nc)
	return CVResult{Folds: k, Accuracy: acc, MacroF1: f1, ECE: ECE(proba, labels), Proba: proba}, nil
}

// AccuracyF1 returns the share of pred equal to labels and the macro-F1 over
// the classes 0..k−1 that occur in labels or pred (see CVResult). It panics
// if the lengths differ; for no rows it returns 0, 0.
func AccuracyF1(labels, pred []int, k int) (accuracy, macroF1 float64) {
	if len(labels) != len(pred) {
		panic(fmt.Sprintf("learner: %d labels, %d predictions", len(labels), len(pred)))
	}
	if len(labels) == 0 {
		return 0, 0
	}
	tp, fp, fn := make([]float64, k), make([]float64, k), make([]float64, k)
	hit := 0
	for i, y := range labels {
		p := pred[i]
		if p == y {
			hit++
			tp[y]++
		} else {
			fp[p]++
			fn[y]++
		}
	}
	var s float64
	var present int
	for c := 0; c < k; c++ {
		if tp[c]+fp[c]+fn[c] == 0 {
			continue
		}
		present++
		s += 2 * tp[c] / (2*tp[c] + fp[c] + fn[c])
	}
	return float64(hit) / float64(len(labels)), s / float64(present)
}
