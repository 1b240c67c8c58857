package crowd

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
)

// The names of the combining methods, as stored in Result.Method and
// handoff.Consensus.Method.
const (
	MethodMajority   = "majority"
	MethodDawidSkene = "dawid-skene"
	MethodOneCoin    = "one-coin"
	// MethodHierarchical is Dawid–Skene with a hierarchical prior (hier.go).
	MethodHierarchical = "hierarchical"
	// MethodAuto picks one of the others by held-out label likelihood
	// (choose.go).
	MethodAuto        = "auto"
	defaultMaxIter    = 200
	defaultTol        = 1e-9
	float32Threshold  = 1 << 22 // labels from which EM tables are held in float32
	logFloorProb      = 1e-300  // probabilities below this count as this in logs
	logFloorProbSmall = 1e-30   // the same for float32 tables
)

// Options configures the combining methods. The zero value is usable.
type Options struct {
	// Seed drives the tie-break of majority vote.
	Seed uint64
	// MaxIter bounds the EM iterations (0 means 200).
	MaxIter int
	// Tol stops EM when the log-likelihood changes by less than
	// Tol·max(1, |log-likelihood|) between iterations, a relative change (0
	// means 1e-9; negative means run all MaxIter iterations).
	Tol float64
	// Smoothing is a Dirichlet pseudo-count α ≥ 0 added to every cell of
	// every confusion matrix and to every class of the prior (0: plain
	// maximum likelihood, as in Dawid & Skene 1979).
	Smoothing float64
	// Gold holds expert classes per item (-1 none); nil means no gold. Gold
	// items have their posterior clamped to the expert class.
	Gold []int
	// Workers is the number of goroutines EM uses (0 means GOMAXPROCS).
	Workers int
}

// Result is a consensus: a posterior per item and a confusion matrix and a
// reliability figure per annotator.
//
// Rules: Posterior is NItems×NClasses row-major and every row sums to 1;
// Class[i] is the largest entry of row i. An item with no labels after
// cleaning and no gold has NLabels[i] == 0 and the class prior as its
// posterior; NoLabels counts them. Confusion is NAnnotators×NClasses×NClasses,
// indexed [annotator][true class][given class], each row summing to 1; an
// annotator with no labels (or no weight on a true class) gets a uniform row.
// Reliability[a] is annotator a's expected accuracy under the class prior,
// Σ_k Prior[k]·Confusion[a][k][k] (1/NClasses for an annotator with no
// labels). Nothing in a Result is NaN.
type Result struct {
	Method                        string
	NItems, NAnnotators, NClasses int

	Posterior   []float64
	Class       []int
	NLabels     []int32
	IsGold      []bool // nil when no gold was given
	Prior       []float64
	Confusion   []float64
	Reliability []float64

	NoLabels int // items with no labels after cleaning and no gold
	Ties     int // majority vote: items whose top classes tied (broken by Seed)

	LogLik     float64 // EM: log-likelihood of the labels at the final parameters
	Iterations int     // EM: number of E+M passes run
	Converged  bool    // EM: |ΔLogLik| < Tol·max(1, |LogLik|) was reached

	// Hier is the estimated prior of the hierarchical model (nil for the
	// other methods).
	Hier *HierPrior
	// Choice says how MethodAuto chose (nil when a method was forced).
	Choice *Choice
}

// Row returns item i's posterior (a view, not a copy).
func (r *Result) Row(i int) []float64 { k := r.NClasses; return r.Posterior[i*k : (i+1)*k] }

// AnnotatorConfusion returns annotator a's confusion matrix as a
// NClasses×NClasses matrix, rows true classes, columns given classes.
func (r *Result) AnnotatorConfusion(a int) *mat.Dense {
	k := r.NClasses
	return mat.NewDense(k, k, append([]float64(nil), r.Confusion[a*k*k:(a+1)*k*k]...))
}

// Uncertain returns, in item order, the items whose largest posterior is
// below p (0.95 if p ≤ 0), including items with no labels: the items that
// need more labels. Gold items are never uncertain.
func Uncertain(r *Result, p float64) []int {
	if p <= 0 {
		p = 0.95
	}
	var out []int
	for i := 0; i < r.NItems; i++ {
		if r.IsGold != nil && r.IsGold[i] {
			continue
		}
		if r.NLabels[i] == 0 || r.Row(i)[r.Class[i]] < p {
			out = append(out, i)
		}
	}
	return out
}

// Combine runs the method named by method (MethodMajority,
// MethodDawidSkene or MethodOneCoin; "" means Dawid–Skene).
func Combine(method string, l *Labels, o Options) (*Result, error) {
	switch method {
	case MethodMajority:
		return Majority(l, o)
	case MethodDawidSkene, "":
		return DawidSkene(l, o)
	case MethodOneCoin:
		return OneCoin(l, o)
	case MethodHierarchical:
		return Hierarchical(l, o)
	case MethodAuto:
		return Auto(l, o)
	}
	return nil, fmt.Errorf("crowd: unknown method %q (want %s, %s, %s, %s or %s)", method, MethodAuto, MethodHierarchical, MethodMajority, MethodDawidSkene, MethodOneCoin)
}

func newResult(method string, l *Labels, o Options) *Result {
	k := l.NClasses
	r := &Result{
		Method: method, NItems: l.NItems, NAnnotators: l.NAnnotators, NClasses: k,
		Posterior:   make([]float64, l.NItems*k),
		Class:       make([]int, l.NItems),
		NLabels:     make([]int32, l.NItems),
		Prior:       make([]float64, k),
		Confusion:   make([]float64, l.NAnnotators*k*k),
		Reliability: make([]float64, l.NAnnotators),
	}
	if o.Gold != nil {
		r.IsGold = make([]bool, l.NItems)
		for i, g := range o.Gold {
			r.IsGold[i] = g >= 0
		}
	}
	return r
}

func checkInput(l *Labels, o Options) error {
	if err := l.Check(); err != nil {
		return err
	}
	if o.Smoothing < 0 || math.IsNaN(o.Smoothing) || math.IsInf(o.Smoothing, 0) {
		return fmt.Errorf("crowd: smoothing %v must be a finite number ≥ 0", o.Smoothing)
	}
	return checkGold(o.Gold, l.NItems, l.NClasses)
}

// Majority combines by majority vote. An item's posterior is its share of
// labels per class; Class is the most frequent class, a tie broken by a
// pseudo-random choice among the tied classes drawn from (Seed, item), and
// counted in Ties. Gold items are clamped to their expert class. Items with
// no labels get the prior (the mean of the labelled items' posteriors). The
// confusion matrices are counts of (majority class, given class) per
// annotator, plus Smoothing, normalised by row.
func Majority(l *Labels, o Options) (*Result, error) {
	if err := checkInput(l, o); err != nil {
		return nil, err
	}
	k := l.NClasses
	r := newResult(MethodMajority, l, o)
	for j, it := range l.Item {
		r.Posterior[int(it)*k+int(l.Class[j])]++
		r.NLabels[it]++
	}
	var nLab float64
	for i := 0; i < l.NItems; i++ {
		row := r.Row(i)
		if g := goldOf(o.Gold, i); g >= 0 {
			clear(row)
			row[g] = 1
			r.Class[i] = g
		} else if r.NLabels[i] > 0 {
			best, nt := 0, 1
			for c := 1; c < k; c++ {
				if row[c] > row[best] {
					best, nt = c, 1
				} else if row[c] == row[best] {
					nt++
				}
			}
			if nt > 1 {
				r.Ties++
				pick := int(mix64(o.Seed, uint64(i)) % uint64(nt))
				for c := 0; c < k; c++ {
					if row[c] == row[best] {
						if pick == 0 {
							best = c
							break
						}
						pick--
					}
				}
			}
			r.Class[i] = best
			inv := 1 / float64(r.NLabels[i])
			for c := range row {
				row[c] *= inv
			}
		} else {
			continue
		}
		nLab++
		for c, v := range row {
			r.Prior[c] += v
		}
	}
	normPrior(r.Prior, nLab, o.Smoothing)
	fillNoLabels(r, o.Gold)
	// Confusion of each annotator against the majority class.
	counts := make([]float64, l.NAnnotators*k*k)
	for j, it := range l.Item {
		a := int(l.Annotator[j])
		counts[(a*k+r.Class[it])*k+int(l.Class[j])]++
	}
	confusionFromCounts(r, counts, o.Smoothing, false)
	return r, nil
}

// DawidSkene combines by the EM algorithm of Dawid & Skene (1979): each
// annotator a has a full confusion matrix π_a[k][c] = P(a gives c | true k),
// the classes a prior p_k, and labels are independent given the true class
// (repeated labels by one annotator count as independent responses).
//
// E-step: T_ik ∝ p_k Π_{labels (a,c) of i} π_a[k][c].
// M-step: p_k = (Σ_i T_ik + α)/(N + Kα) over the N items with labels or gold;
// π_a[k][c] = (Σ_{labels (a,c)} T_ik + α)/(Σ_{labels of a} T_ik + Kα).
//
// EM starts from each item's share of labels per class (their eq. 3.1), with
// gold items clamped to their expert class throughout, and stops when the
// log-likelihood Σ_i log Σ_k p_k Π π_a[k][c] changes by less than
// Tol·max(1, |log-likelihood|) or after
// MaxIter passes. A zero probability enters the logs as 1e-300 (1e-30 when
// the tables are held in float32, from 4,194,304 labels up), so every
// posterior stays finite. The posterior returned is the E-step at the final
// parameters.
func DawidSkene(l *Labels, o Options) (*Result, error) { return runEM(MethodDawidSkene, l, o) }

// Hierarchical is Dawid–Skene with the hierarchical prior of hier.go on
// every annotator's confusion matrix (pooled confusion, shrunk skills, a row
// strength by empirical Bayes); the M-step is the posterior mean of each row.
// Options.Smoothing applies to the class prior only. Otherwise as
// DawidSkene.
func Hierarchical(l *Labels, o Options) (*Result, error) { return runEM(MethodHierarchical, l, o) }

// OneCoin is Dawid–Skene with one accuracy per annotator: π_a[k][k] = q_a and
// π_a[k][c] = (1−q_a)/(K−1) for c ≠ k, with the M-step
// q_a = (Σ_{labels (a,c) of i} T_ic + α)/(n_a + 2α) (n_a: a's labels; an
// annotator with no labels gets q_a = 1/K). Otherwise as DawidSkene.
func OneCoin(l *Labels, o Options) (*Result, error) { return runEM(MethodOneCoin, l, o) }

func goldOf(gold []int, i int) int {
	if gold == nil {
		return -1
	}
	return gold[i]
}

// mix64 is splitmix64 of (seed, x): a deterministic pseudo-random number.
func mix64(seed, x uint64) uint64 {
	z := seed ^ (x+0x9e3779b97f4a7c15)*0xbf58476d1ce4e5b9
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// normPrior turns class sums over n items into (sum+α)/(n+Kα); with n = 0
// and α = 0 the prior is uniform.
func normPrior(p []float64, n, alpha float64) {
	k := float64(len(p))
	den := n + k*alpha
	if den <= 0 {
		for c := range p {
			p[c] = 1 / k
		}
		return
	}
	for c := range p {
		p[c] = (p[c] + alpha) / den
	}
}

func fillNoLabels(r *Result, gold []int) {
	r.NoLabels = 0
	for i := 0; i < r.NItems; i++ {
		if r.NLabels[i] == 0 && goldOf(gold, i) < 0 {
			r.NoLabels++
			copy(r.Row(i), r.Prior)
			r.Class[i] = argmax(r.Prior)
		}
	}
}

// argmax is the index of the largest value, the first on ties (gonum's
// floats.MaxIdx, the one argmax of the module).
var argmax = floats.MaxIdx

// confusionFromCounts fills r.Confusion and r.Reliability from counts laid
// out [a][true k][given c] (transposed: [a][given c][true k]).
func confusionFromCounts(r *Result, counts []float64, alpha float64, transposed bool) {
	k := r.NClasses
	for a := 0; a < r.NAnnotators; a++ {
		cm := r.Confusion[a*k*k : (a+1)*k*k]
		src := counts[a*k*k : (a+1)*k*k]
		for t := 0; t < k; t++ {
			var s float64
			for c := 0; c < k; c++ {
				v := src[t*k+c]
				if transposed {
					v = src[c*k+t]
				}
				cm[t*k+c] = v + alpha
				s += v + alpha
			}
			for c := 0; c < k; c++ {
				if s > 0 {
					cm[t*k+c] /= s
				} else {
					cm[t*k+c] = 1 / float64(k)
				}
			}
		}
		var rel float64
		for t := 0; t < k; t++ {
			rel += r.Prior[t] * cm[t*k+t]
		}
		r.Reliability[a] = rel
	}
}
