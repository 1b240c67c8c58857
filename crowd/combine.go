package crowd

import (
	"fmt"
	"math"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/mat"
)

// The names of the combining methods, as stored in Result.Method and
// handoff.Consensus.Method.
const (
	MethodMajority    = "majority"
	MethodDawidSkene  = "dawid-skene"
	MethodOneCoin     = "one-coin"
	defaultMaxIter    = 200
	defaultTol        = 1e-6
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
	// Tol stops EM when the log-likelihood changes by less than Tol between
	// iterations (0 means 1e-6; negative means run all MaxIter iterations).
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
	Converged  bool    // EM: |ΔLogLik| < Tol was reached
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
	}
	return nil, fmt.Errorf("crowd: unknown method %q (want %s, %s or %s)", method, MethodMajority, MethodDawidSkene, MethodOneCoin)
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
// log-likelihood Σ_i log Σ_k p_k Π π_a[k][c] changes by less than Tol or after
// MaxIter passes. A zero probability enters the logs as 1e-300 (1e-30 when
// the tables are held in float32, from 4,194,304 labels up), so every
// posterior stays finite. The posterior returned is the E-step at the final
// parameters.
func DawidSkene(l *Labels, o Options) (*Result, error) { return runEM(MethodDawidSkene, l, o) }

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

func argmax(x []float64) int {
	b := 0
	for i, v := range x {
		if v > x[b] {
			b = i
		}
	}
	return b
}

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

type float interface{ ~float32 | ~float64 }

// emState holds the EM tables. logT and each worker's counts are laid out
// [annotator][given class][true class] so that one label touches K
// consecutive entries.
type emState[F float] struct {
	k, nA    int
	g        *byItem
	gold     []int
	logT     []F
	logPrior []float64
	counts   [][]F       // per worker
	prior    [][]float64 // per worker: Σ_i T_ik
	ll       []float64   // per worker
	ranges   [][2]int    // per worker: item range
}

func runEM(method string, l *Labels, o Options) (*Result, error) {
	if err := checkInput(l, o); err != nil {
		return nil, err
	}
	if l.Len() >= float32Threshold {
		return emRun[float32](method, l, o)
	}
	return emRun[float64](method, l, o)
}

func emRun[F float](method string, l *Labels, o Options) (*Result, error) {
	k := l.NClasses
	maxIter := o.MaxIter
	if maxIter <= 0 {
		maxIter = defaultMaxIter
	}
	tol := o.Tol
	if tol == 0 {
		tol = defaultTol
	}
	w := o.Workers
	if w <= 0 {
		w = runtime.GOMAXPROCS(0)
	}
	g := groupByItem(l, false)
	if w > l.NItems {
		w = max(1, l.NItems)
	}
	s := &emState[F]{k: k, nA: l.NAnnotators, g: g, gold: o.Gold,
		logT: make([]F, l.NAnnotators*k*k), logPrior: make([]float64, k),
		counts: make([][]F, w), prior: make([][]float64, w), ll: make([]float64, w),
		ranges: splitByLabels(g.start, w)}
	for i := range w {
		s.counts[i] = make([]F, l.NAnnotators*k*k)
		s.prior[i] = make([]float64, k)
	}
	r := newResult(method, l, o)
	for i := 0; i < l.NItems; i++ {
		r.NLabels[i] = int32(g.start[i+1] - g.start[i])
	}
	nItems := 0.0 // items with labels or gold
	for i := 0; i < l.NItems; i++ {
		if r.NLabels[i] > 0 || goldOf(o.Gold, i) >= 0 {
			nItems++
		}
	}
	// Initial M-step from label shares.
	s.run(func(wk int) { s.initPass(wk) })
	s.mstep(method, o.Smoothing, nItems)
	prev := math.Inf(-1)
	for r.Iterations < maxIter {
		s.run(func(wk int) { s.pass(wk, nil) })
		r.Iterations++
		ll := s.sumLL()
		s.mstep(method, o.Smoothing, nItems)
		if math.Abs(ll-prev) < tol {
			r.Converged = true
			break
		}
		prev = ll
	}
	// Final E-step at the final parameters, writing the posterior.
	s.run(func(wk int) { s.pass(wk, r.Posterior) })
	r.LogLik = s.sumLL()
	for c := 0; c < k; c++ {
		r.Prior[c] = math.Exp(s.logPrior[c])
	}
	for i := 0; i < l.NItems; i++ {
		if r.NLabels[i] > 0 || goldOf(o.Gold, i) >= 0 {
			r.Class[i] = argmax(r.Row(i))
		}
	}
	fillNoLabels(r, o.Gold)
	// Confusion matrices from the tables (exp of the logs, undoing the floor).
	for a := 0; a < s.nA; a++ {
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				p := math.Exp(float64(s.logT[(a*k+c)*k+t]))
				if p <= 2*floorFor[F]() {
					p = 0
				}
				r.Confusion[(a*k+t)*k+c] = p
			}
		}
		var rel float64
		for t := 0; t < k; t++ {
			rel += r.Prior[t] * r.Confusion[(a*k+t)*k+t]
		}
		r.Reliability[a] = rel
	}
	return r, nil
}

func floorFor[F float]() float64 {
	var x F
	if _, ok := any(x).(float32); ok {
		return logFloorProbSmall
	}
	return logFloorProb
}

// splitByLabels cuts the items into w contiguous ranges holding about equal
// numbers of labels.
func splitByLabels(start []int, w int) [][2]int {
	n := len(start) - 1
	total := start[n]
	out := make([][2]int, w)
	i := 0
	for k := 0; k < w; k++ {
		lo := i
		target := total * (k + 1) / w
		for i < n && (start[i] < target || k == w-1) {
			i++
		}
		out[k] = [2]int{lo, i}
	}
	out[w-1][1] = n
	return out
}

func (s *emState[F]) run(f func(wk int)) {
	if len(s.ranges) == 1 {
		f(0)
		return
	}
	var wg sync.WaitGroup
	for wk := range s.ranges {
		wg.Add(1)
		go func() { defer wg.Done(); f(wk) }()
	}
	wg.Wait()
}

func (s *emState[F]) sumLL() float64 {
	var t float64
	for _, v := range s.ll {
		t += v
	}
	return t
}

// initPass accumulates counts from each item's share of labels (gold clamped).
func (s *emState[F]) initPass(wk int) {
	k, g := s.k, s.g
	cnt, pr := s.counts[wk], s.prior[wk]
	clear(cnt)
	clear(pr)
	t := make([]F, k)
	for i := s.ranges[wk][0]; i < s.ranges[wk][1]; i++ {
		lo, hi := g.start[i], g.start[i+1]
		clear(t)
		if gd := goldOf(s.gold, i); gd >= 0 {
			t[gd] = 1
		} else if hi == lo {
			continue
		} else {
			inv := 1 / F(hi-lo)
			for j := lo; j < hi; j++ {
				t[g.cls[j]] += inv
			}
		}
		for c := 0; c < k; c++ {
			pr[c] += float64(t[c])
		}
		for j := lo; j < hi; j++ {
			row := cnt[(int(g.ann[j])*k+int(g.cls[j]))*k:][:k]
			for c := range row {
				row[c] += t[c]
			}
		}
	}
}

// pass is one fused E-step and M-step accumulation over the worker's items;
// when post is not nil it also writes the posterior.
func (s *emState[F]) pass(wk int, post []float64) {
	k, g := s.k, s.g
	cnt, pr := s.counts[wk], s.prior[wk]
	clear(cnt)
	clear(pr)
	var ll float64
	sc := make([]float64, k)
	t := make([]F, k)
	lt := s.logT
	for i := s.ranges[wk][0]; i < s.ranges[wk][1]; i++ {
		lo, hi := g.start[i], g.start[i+1]
		gd := goldOf(s.gold, i)
		if hi == lo && gd < 0 {
			if post != nil {
				copy(post[i*k:(i+1)*k], expAll(sc, s.logPrior))
			}
			continue
		}
		copy(sc, s.logPrior)
		if k == 5 {
			s0, s1, s2, s3, s4 := sc[0], sc[1], sc[2], sc[3], sc[4]
			for j := lo; j < hi; j++ {
				row := lt[(int(g.ann[j])*5+int(g.cls[j]))*5:][:5]
				s0 += float64(row[0])
				s1 += float64(row[1])
				s2 += float64(row[2])
				s3 += float64(row[3])
				s4 += float64(row[4])
			}
			sc[0], sc[1], sc[2], sc[3], sc[4] = s0, s1, s2, s3, s4
		} else {
			for j := lo; j < hi; j++ {
				row := lt[(int(g.ann[j])*k+int(g.cls[j]))*k:][:k]
				for c, v := range row {
					sc[c] += float64(v)
				}
			}
		}
		m := sc[0]
		for _, v := range sc[1:] {
			m = max(m, v)
		}
		var vg float64
		if gd >= 0 {
			vg = sc[gd]
		}
		var z float64
		for c, v := range sc {
			e := math.Exp(v - m)
			sc[c] = e
			z += e
		}
		if gd >= 0 {
			ll += vg // complete-data term of a clamped item: log p_g + Σ log π_a[g][c]
			clear(t)
			t[gd] = 1
		} else {
			ll += m + math.Log(z)
			inv := 1 / z
			for c := range sc {
				t[c] = F(sc[c] * inv)
			}
		}
		if post != nil {
			p := post[i*k : (i+1)*k]
			for c := range p {
				p[c] = float64(t[c])
			}
		}
		for c := 0; c < k; c++ {
			pr[c] += float64(t[c])
		}
		if k == 5 {
			t0, t1, t2, t3, t4 := t[0], t[1], t[2], t[3], t[4]
			for j := lo; j < hi; j++ {
				row := cnt[(int(g.ann[j])*5+int(g.cls[j]))*5:][:5]
				row[0] += t0
				row[1] += t1
				row[2] += t2
				row[3] += t3
				row[4] += t4
			}
		} else {
			for j := lo; j < hi; j++ {
				row := cnt[(int(g.ann[j])*k+int(g.cls[j]))*k:][:k]
				for c := range row {
					row[c] += t[c]
				}
			}
		}
	}
	s.ll[wk] = ll
}

func expAll(dst, src []float64) []float64 {
	for c, v := range src {
		dst[c] = math.Exp(v)
	}
	return dst
}

// mstep reduces the workers' accumulators into new log tables.
func (s *emState[F]) mstep(method string, alpha, nItems float64) {
	k := s.k
	cnt := s.counts[0]
	for _, o := range s.counts[1:] {
		for j, v := range o {
			cnt[j] += v
		}
	}
	pr := s.prior[0]
	for _, o := range s.prior[1:] {
		for c, v := range o {
			pr[c] += v
		}
	}
	p := append([]float64(nil), pr...)
	normPrior(p, nItems, alpha)
	floor := floorFor[F]()
	for c := range p {
		s.logPrior[c] = math.Log(max(p[c], floor))
	}
	uni := F(math.Log(1 / float64(k)))
	rowSum := make([]float64, k)
	for a := 0; a < s.nA; a++ {
		blk := cnt[a*k*k : (a+1)*k*k]
		lt := s.logT[a*k*k : (a+1)*k*k]
		if method == MethodOneCoin {
			var diag, tot float64
			for c := 0; c < k; c++ {
				for t := 0; t < k; t++ {
					v := float64(blk[c*k+t])
					tot += v
					if c == t {
						diag += v
					}
				}
			}
			q := 1 / float64(k)
			if tot+2*alpha > 0 {
				q = (diag + alpha) / (tot + 2*alpha)
			}
			on := F(math.Log(max(q, floor)))
			off := F(math.Log(max((1-q)/float64(k-1), floor)))
			for c := 0; c < k; c++ {
				for t := 0; t < k; t++ {
					if c == t {
						lt[c*k+t] = on
					} else {
						lt[c*k+t] = off
					}
				}
			}
			continue
		}
		clear(rowSum)
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				rowSum[t] += float64(blk[c*k+t]) + alpha
			}
		}
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				if rowSum[t] <= 0 {
					lt[c*k+t] = uni
					continue
				}
				lt[c*k+t] = F(math.Log(max((float64(blk[c*k+t])+alpha)/rowSum[t], floor)))
			}
		}
	}
}
