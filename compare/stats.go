// Package compare measures how well two codings of the same things agree:
// the crowd's consensus against an independent (expert) coding, the machine
// against that coding, and one crowd wave against another (test–retest). At
// the level of items it gives accuracy, Cohen's kappa, Krippendorff's alpha
// and the confusion matrix; at the level of parents (the documents or
// sources items come from) Pearson's and Spearman's correlation and the mean
// absolute difference of the two sides' roll-ups, with a scatter plot
// against the 45° line. Every figure comes with a seeded percentile
// bootstrap interval: items are resampled for item-level figures, parents
// for parent-level ones.
//
// The package takes and returns plain Go values and knows nothing of the
// store. Classes are indices 0 … k−1 into a codebook's classes (−1: no
// answer); for an ordinal codebook index order is scale order.
//
// Conventions (as gonum's stat): a weights slice w == nil means all ones;
// w[i] is how many times pair i counts (a bootstrap resample passes its
// multiplicities; whole numbers for kappa and alpha), so every statistic on
// weights equals the statistic on the data with pair i repeated w[i] times.
// Cohen's kappa and Krippendorff's alpha are the module's one copy in
// package crowd; Pearson's r is gonum's. Mismatched lengths are programmer
// errors and panic; data for which a figure is undefined return an error
// that says why.
package compare

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"gonum.org/v1/gonum/stat"

	"handoff/crowd"
)

// Metric is the difference function of Krippendorff's alpha.
type Metric string

// The metrics of Krippendorff's alpha used here (Krippendorff 2011,
// "Computing Krippendorff's Alpha-Reliability").
const (
	// Nominal: δ²_ck = 0 if c = k, else 1.
	Nominal Metric = "nominal"
	// Ordinal: δ²_ck = (Σ_{g=c}^{k} n_g − (n_c + n_k)/2)², with n_g the
	// marginal totals of the coincidence matrix and classes in scale order:
	// the distance between two ranks is the number of pairable values
	// between them, not the difference of their indices.
	Ordinal Metric = "ordinal"
)

// ErrUndefined is wrapped by the errors of statistics that the data do not
// define (no pair, zero variance, one class throughout).
var ErrUndefined = errors.New("undefined")

func undefined(format string, a ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrUndefined}, a...)...)
}

func weight(w []float64, i int) float64 {
	if w == nil {
		return 1
	}
	return w[i]
}

func checkLen(name string, x, y int, w []float64) {
	if x != y {
		panic(fmt.Sprintf("compare: %s: x has %d values, y %d", name, x, y))
	}
	if w != nil && len(w) != x {
		panic(fmt.Sprintf("compare: %s: %d weights for %d values", name, len(w), x))
	}
}

// Accuracy is the weighted share of pairs on which the two codings agree,
//
//	Σ_i w_i [x_i = y_i] / Σ_i w_i,
//
// over the pairs where both x_i ≥ 0 and y_i ≥ 0. No such pair (or zero
// total weight) is an error.
func Accuracy(x, y []int, w []float64) (float64, error) {
	checkLen("Accuracy", len(x), len(y), w)
	var n, agree float64
	for i := range x {
		if x[i] < 0 || y[i] < 0 {
			continue
		}
		wi := weight(w, i)
		n += wi
		if x[i] == y[i] {
			agree += wi
		}
	}
	if n == 0 {
		return 0, undefined("no item is coded by both sides")
	}
	return agree / n, nil
}

// CohenKappa is Cohen's (1960) kappa of two codings over k classes,
//
//	κ = (p_o − p_e) / (1 − p_e),
//
// p_o the share of pairs on which they agree and p_e = Σ_c p_xc·p_yc from
// their class shares, over the pairs both coded (x_i, y_i ≥ 0), each pair
// counted w_i times. It is the module's one Cohen's kappa,
// crowd.CohenKappaCounts, on the weighted confusion table: no pair, or p_e =
// 1 (both sides gave one and the same class throughout), is an error. The
// weights must be whole numbers (multiplicities); a class index ≥ k panics.
func CohenKappa(x, y []int, k int, w []float64) (float64, error) {
	checkLen("CohenKappa", len(x), len(y), w)
	c := make([][]int, k)
	for a := range c {
		c[a] = make([]int, k)
	}
	n := 0
	for i := range x {
		if x[i] >= 0 && y[i] >= 0 {
			m := multiplicity(w, i)
			c[x[i]][y[i]] += m
			n += m
		}
	}
	if n == 0 {
		return 0, undefined("no item is coded by both sides")
	}
	kp, err := crowd.CohenKappaCounts(c)
	if err != nil {
		return 0, undefined("both sides gave one and the same class to every item")
	}
	return kp.Kappa, nil
}

// multiplicity is w[i] as a whole number (1 when w is nil); a fractional
// weight panics.
func multiplicity(w []float64, i int) int {
	if w == nil {
		return 1
	}
	m := int(w[i])
	if float64(m) != w[i] || m < 0 {
		panic(fmt.Sprintf("compare: weight %v is not a whole number ≥ 0", w[i]))
	}
	return m
}

// Confusion is the confusion matrix of two codings: m[a][b] is the number
// of pairs with x_i = a and y_i = b (pairs with a missing side left out).
func Confusion(x, y []int, k int) [][]int {
	checkLen("Confusion", len(x), len(y), nil)
	m := make([][]int, k)
	for a := range m {
		m[a] = make([]int, k)
	}
	for i := range x {
		if x[i] >= 0 && y[i] >= 0 {
			m[x[i]][y[i]]++
		}
	}
	return m
}

// KrippendorffAlpha is Krippendorff's alpha of reliability data: units[u]
// holds the values (class indices 0 … k−1) the coders gave unit u; a
// missing value is simply absent; unit u counts w_u times (whole numbers).
// Units with fewer than two values are not pairable and are left out. With
// the coincidences o_ck = Σ_u Σ_{i≠j} [v_ui = c][v_uj = k] / (m_u − 1),
// n_c = Σ_k o_ck and n = Σ_c n_c,
//
//	α = 1 − D_o/D_e = 1 − (n − 1) Σ_{c,k} o_ck δ²_ck / Σ_{c,k} n_c n_k δ²_ck
//
// (Krippendorff 2011), computed by the module's one alpha,
// crowd.KrippendorffAlpha, with its nominal or ordinal metric. Fewer than
// two pairable values, or no expected disagreement (every value alike), is
// an error.
func KrippendorffAlpha(units [][]int, k int, m Metric, w []float64) (float64, error) {
	if w != nil && len(w) != len(units) {
		panic(fmt.Sprintf("compare: KrippendorffAlpha: %d weights for %d units", len(w), len(units)))
	}
	counts := make([]int, 0, len(units)*k)
	for u, vals := range units {
		row := make([]int, k)
		for _, v := range vals {
			row[v]++
		}
		for range multiplicity(w, u) {
			counts = append(counts, row...)
		}
	}
	return alphaOf(counts, k, m)
}

// alphaPairs is KrippendorffAlpha for two codings (units of two values,
// pairs with a missing side left out).
func alphaPairs(x, y []int, k int, m Metric, w []float64) (float64, error) {
	counts := make([]int, 0, len(x)*k)
	row := make([]int, k)
	for i := range x {
		if x[i] < 0 || y[i] < 0 {
			continue
		}
		clear(row)
		row[x[i]]++
		row[y[i]]++
		for range multiplicity(w, i) {
			counts = append(counts, row...)
		}
	}
	return alphaOf(counts, k, m)
}

func alphaOf(counts []int, k int, m Metric) (float64, error) {
	metric := crowd.MetricNominal
	switch m {
	case Nominal:
	case Ordinal:
		metric = crowd.MetricOrdinal
	default:
		panic(fmt.Sprintf("compare: unknown metric %q", m))
	}
	a, err := crowd.KrippendorffAlpha(counts, k, nil, metric)
	if err != nil {
		if strings.Contains(err.Error(), "fewer than two") {
			return 0, undefined("fewer than two pairable values")
		}
		return 0, undefined("every value is the same class, so no disagreement is expected")
	}
	return a, nil
}

// Pearson is Pearson's product-moment correlation of x and y with weights
// w (gonum's stat.Correlation):
//
//	r = Σ w (x − x̄)(y − ȳ) / √(Σ w (x − x̄)² · Σ w (y − ȳ)²),
//
// weighted means x̄, ȳ. Fewer than two points of positive weight, or zero
// variance on either side, is an error.
func Pearson(x, y, w []float64) (float64, error) {
	checkLen("Pearson", len(x), len(y), w)
	if err := spread(x, y, w); err != nil {
		return 0, err
	}
	r := stat.Correlation(x, y, w)
	if math.IsNaN(r) {
		return 0, undefined("the correlation is not a number")
	}
	return math.Max(-1, math.Min(1, r)), nil
}

// spread checks that x and y each take at least two distinct values among
// the points of positive weight.
func spread(x, y, w []float64) error {
	npos := 0
	xs, ys := math.NaN(), math.NaN()
	vx, vy := false, false
	for i := range x {
		if weight(w, i) <= 0 {
			continue
		}
		npos++
		if npos == 1 {
			xs, ys = x[i], y[i]
			continue
		}
		vx = vx || x[i] != xs
		vy = vy || y[i] != ys
	}
	switch {
	case npos < 2:
		return undefined("fewer than two parents")
	case !vx && !vy:
		return undefined("both sides give every parent the same value (zero variance)")
	case !vx:
		return undefined("the first side gives every parent the same value (zero variance)")
	case !vy:
		return undefined("the second side gives every parent the same value (zero variance)")
	}
	return nil
}

// Spearman is Spearman's rank correlation: Pearson's r of the midranks of
// x and of y. With weights, a point of weight w_i stands for w_i tied
// copies: the midrank of a value is the weight of the points below it plus
// (the weight of its tie group + 1)/2, so the result equals Spearman's ρ of
// the expanded data. Errors as Pearson.
func Spearman(x, y, w []float64) (float64, error) {
	checkLen("Spearman", len(x), len(y), w)
	if err := spread(x, y, w); err != nil {
		return 0, err
	}
	return Pearson(midranks(x, w), midranks(y, w), w)
}

// midranks returns the weighted midranks of v (see Spearman); points of
// weight 0 get rank 0 and do not count.
func midranks(v, w []float64) []float64 {
	idx := make([]int, 0, len(v))
	for i := range v {
		if weight(w, i) > 0 {
			idx = append(idx, i)
		}
	}
	sort.Slice(idx, func(a, b int) bool { return v[idx[a]] < v[idx[b]] })
	r := make([]float64, len(v))
	below := 0.0
	for s := 0; s < len(idx); {
		e := s
		g := 0.0
		for e < len(idx) && v[idx[e]] == v[idx[s]] {
			g += weight(w, idx[e])
			e++
		}
		rank := below + (g+1)/2
		for _, i := range idx[s:e] {
			r[i] = rank
		}
		below += g
		s = e
	}
	return r
}

// MeanAbsDiff is the weighted mean absolute difference Σ w|x − y| / Σ w.
// Zero total weight is an error.
func MeanAbsDiff(x, y, w []float64) (float64, error) {
	checkLen("MeanAbsDiff", len(x), len(y), w)
	var s, n float64
	for i := range x {
		wi := weight(w, i)
		s += wi * math.Abs(x[i]-y[i])
		n += wi
	}
	if n == 0 {
		return 0, undefined("no parent")
	}
	return s / n, nil
}
