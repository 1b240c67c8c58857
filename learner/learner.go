// Package learner trains classifiers that imitate the crowd's consensus and
// scores new items with class probabilities. It follows the estimator shape
// of scikit-learn (Buitinck et al. 2013): a learner is a configuration struct
// whose Fit returns a fitted Model, and a Model predicts probabilities.
//
// Every learner takes soft targets: targets[i] holds row i's probability of
// each class (the consensus posterior), so an item the crowd is unsure of
// pulls on the model less than a clear one. Row weights multiply each row's
// contribution; weights == nil means all ones.
//
// The package also holds temperature scaling (Calibrate), the expected
// calibration error (ECE), splits that keep the items of one parent together
// (GroupKFold, GroupSplit), k-fold cross-validation (CrossValidate), the
// Machine (features + model + temperature + class keys) and its model file
// (WriteMachine, ReadMachine). It knows nothing of the store, HTTP or flags.
//
// Size: about 2,300 lines for three learners (each with its own
// optimiser or tree growing), calibration, cross-validation and the model
// file; they share one interface and one file, so they stay together.
package learner

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"

	"handoff/features"
)

// Learner is a learner's configuration. Fit trains a model on the rows of X
// with per-row class probabilities targets (len(targets) == X.Rows(), every
// row of the same length K ≥ 2, entries ≥ 0 summing to 1) and per-row weights
// (nil means all ones; otherwise len(weights) == X.Rows(), entries ≥ 0).
//
// Length mismatches are programmer errors and panic. Bad data returns an
// error and never a model with NaN parameters: an empty training set, fewer
// than two classes, a class with no target mass ("a class without
// examples"), an X in which no column varies (every feature has zero
// variance, so there is nothing to learn from), NaN or infinite values in X, targets or weights,
// or target rows that do not sum to 1.
type Learner interface {
	Fit(X features.Matrix, targets [][]float64, weights []float64) (Model, error)
}

// Model is a fitted classifier.
//
// PredictProba returns one row of Classes() probabilities per row of X.
// PredictProbaInto writes the same numbers into dst, row-major
// (dst[i*Classes()+k]), reusing the caller's memory; len(dst) must be
// X.Rows()*Classes() (it panics otherwise). X must have the number of columns
// the model was trained on.
type Model interface {
	Classes() int
	PredictProba(X features.Matrix) [][]float64
	PredictProbaInto(dst []float64, X features.Matrix)
}

// predictRows is the shared body of PredictProba: it allocates one flat
// block and slices it into rows.
func predictRows(m Model, X features.Matrix) [][]float64 {
	n, k := X.Rows(), m.Classes()
	flat := make([]float64, n*k)
	m.PredictProbaInto(flat, X)
	out := make([][]float64, n)
	for i := range out {
		out[i] = flat[i*k : (i+1)*k : (i+1)*k]
	}
	return out
}

// threads returns t if positive, otherwise GOMAXPROCS.
func threads(t int) int {
	if t > 0 {
		return t
	}
	return runtime.GOMAXPROCS(0)
}

// parallelRows calls f(lo, hi) on about t equal chunks of [0, n) at once.
func parallelRows(n, t int, f func(lo, hi int)) {
	if t > n {
		t = n
	}
	if t <= 1 {
		if n > 0 {
			f(0, n)
		}
		return
	}
	var wg sync.WaitGroup
	for c := 0; c < t; c++ {
		lo, hi := c*n/t, (c+1)*n/t
		wg.Add(1)
		go func() {
			defer wg.Done()
			f(lo, hi)
		}()
	}
	wg.Wait()
}

// checkShape panics on the programmer errors Fit must not accept and
// returns the number of classes.
func checkShape(X features.Matrix, targets [][]float64, weights []float64) int {
	if X == nil {
		panic("learner: nil matrix")
	}
	n := X.Rows()
	if len(targets) != n {
		panic(fmt.Sprintf("learner: %d target rows for %d matrix rows", len(targets), n))
	}
	if weights != nil && len(weights) != n {
		panic(fmt.Sprintf("learner: %d weights for %d matrix rows", len(weights), n))
	}
	if n == 0 {
		return 0
	}
	k := len(targets[0])
	for i, t := range targets {
		if len(t) != k {
			panic(fmt.Sprintf("learner: target row %d has %d classes, row 0 has %d", i, len(t), k))
		}
	}
	return k
}

// ErrEmpty is returned by Fit when there are no training rows.
var ErrEmpty = errors.New("learner: empty training set: no rows to train on")

// validate checks the data rules stated on Learner and returns the number of
// classes. nonNegX also requires X ≥ 0 (naive Bayes).
func validate(X features.Matrix, targets [][]float64, weights []float64, nonNegX bool) (int, error) {
	k := checkShape(X, targets, weights)
	n := X.Rows()
	if n == 0 {
		return 0, ErrEmpty
	}
	if k < 2 {
		return 0, fmt.Errorf("learner: %d class(es) in the targets: need at least two classes to train a classifier", k)
	}
	mass := make([]float64, k)
	var wsum float64
	for i, t := range targets {
		w := 1.0
		if weights != nil {
			w = weights[i]
			if math.IsNaN(w) || math.IsInf(w, 0) || w < 0 {
				return 0, fmt.Errorf("learner: weight of row %d is %v: weights must be finite and ≥ 0", i, w)
			}
		}
		var s float64
		for c, v := range t {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				return 0, fmt.Errorf("learner: target of row %d, class %d is %v: targets must be finite probabilities ≥ 0", i, c, v)
			}
			s += v
			mass[c] += w * v
		}
		if math.Abs(s-1) > 1e-6 {
			return 0, fmt.Errorf("learner: targets of row %d sum to %v, not 1", i, s)
		}
		wsum += w
	}
	if wsum == 0 {
		return 0, errors.New("learner: every row has weight 0: nothing to train on")
	}
	for c, m := range mass {
		if m == 0 {
			return 0, fmt.Errorf("learner: class %d has no examples (no target mass in any row with weight > 0); drop it from the targets or label some items of it first", c)
		}
	}
	d := X.Cols()
	if d == 0 {
		return 0, errors.New("learner: the matrix has no columns: no features to learn from")
	}
	// A column varies if it holds two different values across the rows
	// (an absent sparse entry counts as 0).
	first := make([]float64, d)
	seen := make([]int32, d)
	varies := false
	for i := 0; i < n; i++ {
		idx, val := X.Row(i)
		for p, v := range val {
			j := p
			if idx != nil {
				j = int(idx[p])
			}
			if j < 0 || j >= d {
				panic(fmt.Sprintf("learner: row %d has column index %d outside [0, %d)", i, j, d))
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, fmt.Errorf("learner: X[%d, %d] is %v: features must be finite", i, j, v)
			}
			if nonNegX && v < 0 {
				return 0, fmt.Errorf("learner: X[%d, %d] is %v: naive Bayes needs counts or other non-negative features", i, j, v)
			}
			if varies {
				continue
			}
			if seen[j] == 0 {
				first[j] = v
			} else if v != first[j] {
				varies = true
			}
			seen[j]++
		}
	}
	if !varies && idxSparse(X) {
		// In a sparse matrix a column with entries in some rows but not
		// all also varies (the absent ones are 0), unless its entries are 0.
		for j := 0; j < d; j++ {
			if seen[j] > 0 && int(seen[j]) < n && first[j] != 0 {
				varies = true
				break
			}
		}
	}
	if !varies {
		return 0, errors.New("learner: no feature varies across the training rows (every column has zero variance): nothing to learn from")
	}
	return k, nil
}

// idxSparse reports whether X's rows carry column indices.
func idxSparse(X features.Matrix) bool {
	if X.Rows() == 0 {
		return false
	}
	for i := 0; i < X.Rows(); i++ {
		idx, val := X.Row(i)
		if len(val) > 0 {
			return idx != nil
		}
	}
	return true
}

// softmaxInPlace replaces z by softmax(z) using the log-sum-exp shift and
// returns log Σ exp(z).
func softmaxInPlace(z []float64) float64 {
	m := z[0]
	for _, v := range z[1:] {
		if v > m {
			m = v
		}
	}
	var s float64
	for c, v := range z {
		e := math.Exp(v - m)
		z[c] = e
		s += e
	}
	inv := 1 / s
	for c := range z {
		z[c] *= inv
	}
	return m + math.Log(s)
}

// Subset returns a read-only view of the given rows of X, in the order
// given. The view shares X's memory.
func Subset(X features.Matrix, rows []int) features.Matrix {
	return &subset{m: X, rows: rows}
}

type subset struct {
	m    features.Matrix
	rows []int
}

func (s *subset) Rows() int                      { return len(s.rows) }
func (s *subset) Cols() int                      { return s.m.Cols() }
func (s *subset) Row(i int) ([]int32, []float64) { return s.m.Row(s.rows[i]) }

func subsetTargets(t [][]float64, rows []int) [][]float64 {
	out := make([][]float64, len(rows))
	for i, r := range rows {
		out[i] = t[r]
	}
	return out
}

func subsetWeights(w []float64, rows []int) []float64 {
	if w == nil {
		return nil
	}
	out := make([]float64, len(rows))
	for i, r := range rows {
		out[i] = w[r]
	}
	return out
}
