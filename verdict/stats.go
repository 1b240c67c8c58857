package verdict

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"

	"handoff/crowd"
)

// ClopperPearson returns the exact two-sided binomial interval (Clopper &
// Pearson 1934) for k successes in n trials at the given level (e.g. 0.95):
//
//	lo = B⁻¹(α/2; k, n−k+1),  hi = B⁻¹(1−α/2; k+1, n−k),  α = 1 − level,
//
// where B⁻¹(q; a, b) is the quantile of the Beta(a, b) distribution, with
// lo = 0 when k = 0 and hi = 1 when k = n. It panics unless 0 ≤ k ≤ n,
// n > 0 and 0 < level < 1.
func ClopperPearson(k, n int, level float64) (lo, hi float64) {
	checkBinom(k, n, level)
	a := 1 - level
	lo, hi = 0, 1
	if k > 0 {
		lo = distuv.Beta{Alpha: float64(k), Beta: float64(n - k + 1)}.Quantile(a / 2)
	}
	if k < n {
		hi = distuv.Beta{Alpha: float64(k + 1), Beta: float64(n - k)}.Quantile(1 - a/2)
	}
	return lo, hi
}

// UpperBound returns the exact one-sided Clopper–Pearson upper bound at the
// given level for k successes in n trials:
//
//	hi = B⁻¹(level; k+1, n−k), and 1 when k = n.
//
// For k = 0 it equals 1 − (1−level)^(1/n), close to the "rule of three"
// 3/n at level 0.95. It panics unless 0 ≤ k ≤ n, n > 0 and 0 < level < 1.
func UpperBound(k, n int, level float64) float64 {
	checkBinom(k, n, level)
	if k == n {
		return 1
	}
	return distuv.Beta{Alpha: float64(k + 1), Beta: float64(n - k)}.Quantile(level)
}

func checkBinom(k, n int, level float64) {
	if n <= 0 || k < 0 || k > n || !(level > 0 && level < 1) {
		panic(fmt.Sprintf("verdict: binomial bound needs 0 ≤ k ≤ n, n > 0, 0 < level < 1; have k=%d n=%d level=%v", k, n, level))
	}
}

// quantile7 returns the p-quantile of sorted x by linear interpolation
// between order statistics (Hyndman & Fan 1996 type 7, R's default):
// h = (m−1)p, x[⌊h⌋] + (h−⌊h⌋)(x[⌊h⌋+1] − x[⌊h⌋]).
func quantile7(sorted []float64, p float64) float64 {
	m := len(sorted)
	if m == 1 {
		return sorted[0]
	}
	h := float64(m-1) * p
	lo := int(math.Floor(h))
	if lo >= m-1 {
		return sorted[m-1]
	}
	return sorted[lo] + (h-float64(lo))*(sorted[lo+1]-sorted[lo])
}

// Proportion returns k/n with its exact two-sided Clopper–Pearson interval
// at level, or nil (no estimate) when n = 0. It panics unless 0 ≤ k ≤ n and
// 0 < level < 1.
func Proportion(k, n int, level float64) *Interval {
	if n == 0 {
		if k != 0 {
			panic(fmt.Sprintf("verdict: proportion %d of 0", k))
		}
		return nil
	}
	lo, hi := ClopperPearson(k, n, level)
	return &Interval{Est: float64(k) / float64(n), Lo: lo, Hi: hi}
}

// Interval is an estimate with a confidence interval.
type Interval struct {
	Est float64 `json:"est"`
	Lo  float64 `json:"lo"`
	Hi  float64 `json:"hi"`
}

// ClassScore is one class's precision and recall of the machine against the
// reference, with counts. Precision is TP/Predicted and Recall TP/Support,
// each with its exact two-sided Clopper–Pearson interval at the agreement's
// level; either is nil ("no estimate") when its denominator is 0.
type ClassScore struct {
	Class     string    `json:"class"`
	Support   int       `json:"support"`   // held-out items whose reference is this class
	Predicted int       `json:"predicted"` // held-out items the machine gives this class
	Precision *Interval `json:"precision"`
	Recall    *Interval `json:"recall"`
	F1        float64   `json:"f1"`
}

// Agreement is the machine against the reference on the held-out set.
// Accuracy, kappa and macro-F1 have seeded percentile bootstrap intervals;
// per-class figures and cells exact binomial ones (see Agree).
type Agreement struct {
	N        int      `json:"n"`
	Level    float64  `json:"level"`
	B        int      `json:"bootstrap"`
	Accuracy Interval `json:"accuracy"`
	Kappa    Interval `json:"kappa"`
	// KappaNote says why Kappa has no estimate or no interval (Cohen's
	// kappa is undefined where both sides use one class; see
	// crowd.CohenKappa); "" when it has both. Resamples where kappa is
	// undefined are left out of its interval.
	KappaNote string       `json:"kappa_note,omitempty"`
	MacroF1   Interval     `json:"macro_f1"`
	Classes   []ClassScore `json:"classes"`
	// Confusion[t][p] counts held-out items with reference class t and
	// machine class p; Cells[t][p] is that count's share of N with its
	// exact interval.
	Confusion [][]int      `json:"confusion"`
	Cells     [][]Interval `json:"cells"`
}

// confusion counts truth×pred over the items idx (nil means all).
func confusion(c [][]int, truth, pred []int, idx []int) {
	for _, r := range c {
		clear(r)
	}
	if idx == nil {
		for i := range truth {
			c[truth[i]][pred[i]]++
		}
		return
	}
	for _, i := range idx {
		c[truth[i]][pred[i]]++
	}
}

// scores computes accuracy, kappa, macro-F1, per-class precision, recall
// and F1 of a confusion table c[truth][pred]. Conventions (scikit-learn's
// zero_division=0): precision is 0 for a class never predicted, recall 0 for
// a class with no support, F1 0 when both are 0; macro-F1 averages F1 over
// the classes that occur in truth or predictions. Cohen's kappa is
// crowd.CohenKappaCounts; kappaOK is false where it is undefined (machine
// and reference put every item in one and the same class).
func scores(c [][]int, prec, rec, f1 []float64) (acc, kappa float64, kappaOK bool, macro float64) {
	k := len(c)
	n, diag := 0, 0
	used := 0
	for j := 0; j < k; j++ {
		row, col := 0, 0
		for m := 0; m < k; m++ {
			row += c[j][m]
			col += c[m][j]
		}
		n += row
		diag += c[j][j]
		prec[j], rec[j], f1[j] = 0, 0, 0
		if col > 0 {
			prec[j] = float64(c[j][j]) / float64(col)
		}
		if row > 0 {
			rec[j] = float64(c[j][j]) / float64(row)
		}
		if prec[j]+rec[j] > 0 {
			f1[j] = 2 * prec[j] * rec[j] / (prec[j] + rec[j])
		}
		if row+col > 0 {
			used++
			macro += f1[j]
		}
	}
	macro /= float64(used)
	kp, err := crowd.CohenKappaCounts(c)
	return float64(diag) / float64(n), kp.Kappa, err == nil, macro
}

// Agree compares machine classes pred with reference classes truth (each in
// [0, len(classes))). Accuracy, Cohen's kappa and macro-F1 get a seeded
// percentile bootstrap interval (Efron & Tibshirani 1993, ch. 13): B
// resamples of the items with replacement, the figure recomputed on each,
// and the (1−level)/2 and (1+level)/2 quantiles (type 7) of the B values
// taken as the interval. Per-class precision and recall and the cells'
// shares are binomial proportions and get the exact two-sided
// Clopper–Pearson interval instead, which never collapses to a point (0 of
// 11 gives [0, 0.285], 2 of 2 gives [0.158, 1]); a proportion with a zero
// denominator has no estimate (nil). B ≤ 0 means 1000, level 0 means 0.95. It returns an error for an empty set
// or a class outside the codebook; length mismatch panics.
func Agree(truth, pred []int, classes []string, B int, level float64, seed uint64) (Agreement, error) {
	if len(truth) != len(pred) {
		panic(fmt.Sprintf("verdict: %d consensus classes and %d machine classes", len(truth), len(pred)))
	}
	if B <= 0 {
		B = 1000
	}
	if level == 0 {
		level = 0.95
	}
	if !(level > 0 && level < 1) {
		return Agreement{}, fmt.Errorf("level: %v is not in (0, 1)", level)
	}
	k := len(classes)
	n := len(truth)
	if n == 0 {
		return Agreement{}, fmt.Errorf("held-out set: no items to compare")
	}
	for i := range truth {
		if truth[i] < 0 || truth[i] >= k {
			return Agreement{}, fmt.Errorf("held-out item %d: consensus class %d outside the %d classes", i, truth[i], k)
		}
		if pred[i] < 0 || pred[i] >= k {
			return Agreement{}, fmt.Errorf("held-out item %d: machine class %d outside the %d classes", i, pred[i], k)
		}
	}
	c := make([][]int, k)
	for j := range c {
		c[j] = make([]int, k)
	}
	prec, rec, f1 := make([]float64, k), make([]float64, k), make([]float64, k)
	confusion(c, truth, pred, nil)
	acc, kap, kapOK, mf1 := scores(c, prec, rec, f1)
	ag := Agreement{N: n, Level: level, B: B, Confusion: make([][]int, k)}
	for j := range c {
		ag.Confusion[j] = slices.Clone(c[j])
	}
	// Bootstrap replicates: series[f][b] for accuracy, kappa and macro-F1.
	nf := 3
	series := make([][]float64, nf)
	for f := range series {
		series[f] = make([]float64, B)
	}
	series[1] = series[1][:0]                   // kappa: only the resamples where it is defined
	rng := rand.New(rand.NewPCG(seed, 0xb0075)) // seeded
	idx := make([]int, n)
	bp, br, bf := make([]float64, k), make([]float64, k), make([]float64, k)
	for b := 0; b < B; b++ {
		for i := range idx {
			idx[i] = rng.IntN(n)
		}
		confusion(c, truth, pred, idx)
		a, kp, ok, m := scores(c, bp, br, bf)
		series[0][b], series[2][b] = a, m
		if ok {
			series[1] = append(series[1], kp)
		}
	}
	iv := func(f int, est float64) Interval {
		s := series[f]
		slices.Sort(s)
		return Interval{Est: est, Lo: quantile7(s, (1-level)/2), Hi: quantile7(s, (1+level)/2)}
	}
	ag.Accuracy, ag.MacroF1 = iv(0, acc), iv(2, mf1)
	switch {
	case !kapOK:
		ag.KappaNote = "no estimate: machine and reference put every item in one and the same class, so kappa is 0/0"
	case len(series[1]) < B/2:
		ag.Kappa = Interval{Est: kap, Lo: -1, Hi: 1}
		ag.KappaNote = fmt.Sprintf("no interval: kappa is undefined in %d of %d bootstrap resamples", B-len(series[1]), B)
	default:
		ag.Kappa = iv(1, kap)
	}
	for j := 0; j < k; j++ {
		sup, pr := 0, 0
		for q := 0; q < k; q++ {
			sup += ag.Confusion[j][q]
			pr += ag.Confusion[q][j]
		}
		tp := ag.Confusion[j][j]
		ag.Classes = append(ag.Classes, ClassScore{Class: classes[j], Support: sup, Predicted: pr,
			Precision: Proportion(tp, pr, level), Recall: Proportion(tp, sup, level), F1: f1[j]})
	}
	ag.Cells = make([][]Interval, k)
	for j := 0; j < k; j++ {
		ag.Cells[j] = make([]Interval, k)
		for q := 0; q < k; q++ {
			ag.Cells[j][q] = *Proportion(ag.Confusion[j][q], n, level)
		}
	}
	return ag, nil
}
