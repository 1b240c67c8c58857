package crowd

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sort"
	"sync"

	"gonum.org/v1/gonum/stat"
)

// Kappa is a chance-corrected agreement: observed agreement Po, agreement
// expected by chance Pe, and κ = (Po − Pe)/(1 − Pe) over N items.
type Kappa struct {
	Po, Pe, Kappa float64
	N             int
}

// CohenKappa is Cohen's (1960) kappa of two annotators: x[i] and y[i] are
// their classes for item i (-1: not labelled); items both labelled count.
// Po is the share of those items where they agree, Pe = Σ_c px_c·py_c with
// px, py their class shares, and κ = (Po − Pe)/(1 − Pe).
//
// Convention (the module's one Cohen's kappa; verdict uses it too): κ is
// undefined when Pe = 1 — both gave one and the same class throughout, so
// Po = 1 as well and κ = 0/0 — and that is an error, as is no common item;
// the caller says "no estimate" and why rather than print a number
// (scikit-learn's cohen_kappa_score gives NaN there).
func CohenKappa(x, y []int, k int) (Kappa, error) {
	if len(x) != len(y) {
		panic(fmt.Sprintf("crowd: CohenKappa: x has %d items, y %d", len(x), len(y)))
	}
	return cohenW(x, y, nil, k)
}

// CohenKappaCounts is CohenKappa of a square table of counts: c[a][b] items
// that the first rater put in class a and the second in class b. A table
// that is not square panics; undefined κ is an error as for CohenKappa.
func CohenKappaCounts(c [][]int) (Kappa, error) {
	k := len(c)
	x, y, w := make([]int, 0, k*k), make([]int, 0, k*k), make([]float64, 0, k*k)
	n := 0
	for a := range c {
		if len(c[a]) != k {
			panic(fmt.Sprintf("crowd: CohenKappaCounts: row %d has %d cells, want %d", a, len(c[a]), k))
		}
		for b, v := range c[a] {
			x, y, w = append(x, a), append(y, b), append(w, float64(v))
			n += v
		}
	}
	kp, err := cohenW(x, y, w, k)
	kp.N = n
	return kp, err
}

func cohenW(x, y []int, w []float64, k int) (Kappa, error) {
	px := make([]float64, k)
	py := make([]float64, k)
	var n, agree float64
	items := 0
	for i := range x {
		if x[i] < 0 || y[i] < 0 {
			continue
		}
		if x[i] >= k || y[i] >= k {
			return Kappa{}, fmt.Errorf("crowd: item %d: class %d or %d out of range [0,%d)", i, x[i], y[i], k)
		}
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		if wi == 0 {
			continue
		}
		items++
		n += wi
		px[x[i]] += wi
		py[y[i]] += wi
		if x[i] == y[i] {
			agree += wi
		}
	}
	if n == 0 {
		return Kappa{}, fmt.Errorf("crowd: kappa undefined: the two annotators share no item")
	}
	var pe float64
	for c := 0; c < k; c++ {
		pe += px[c] / n * py[c] / n
	}
	po := agree / n
	if pe >= 1-1e-12 {
		return Kappa{Po: po, Pe: pe, N: items}, fmt.Errorf("crowd: kappa undefined: both annotators gave one and the same class to all %d shared items", items)
	}
	return Kappa{Po: po, Pe: pe, Kappa: (po - pe) / (1 - pe), N: items}, nil
}

// FleissKappa is Fleiss' (1971) kappa from per-item class counts: counts is
// NItems×k row-major, counts[i*k+c] the number of annotators who gave item i
// class c. Items with fewer than two labels are left out; items may have
// different numbers of labels. With n_i labels on item i,
// P_i = Σ_c n_ic(n_ic − 1)/(n_i(n_i − 1)), Po = P̄ = mean P_i,
// p_c = Σ_i n_ic / Σ_i n_i and Pe = P̄e = Σ_c p_c². Fewer than one usable item
// or Pe = 1 is an error.
func FleissKappa(counts []int, k int) (Kappa, error) {
	if k < 1 || len(counts)%k != 0 {
		panic(fmt.Sprintf("crowd: FleissKappa: %d counts is not a multiple of k = %d", len(counts), k))
	}
	return fleissW(counts, nil, k)
}

func fleissW(counts []int, w []float64, k int) (Kappa, error) {
	n := len(counts) / k
	p := make([]float64, k)
	var sumP, wsum, tot float64
	items := 0
	for i := 0; i < n; i++ {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		row := counts[i*k : (i+1)*k]
		var ni, agree float64
		for _, v := range row {
			if v < 0 {
				return Kappa{}, fmt.Errorf("crowd: item %d has a negative count", i)
			}
			ni += float64(v)
			agree += float64(v) * float64(v-1)
		}
		if ni < 2 || wi == 0 {
			continue
		}
		items++
		sumP += wi * agree / (ni * (ni - 1))
		wsum += wi
		for c, v := range row {
			p[c] += wi * float64(v)
		}
		tot += wi * ni
	}
	if items == 0 {
		return Kappa{}, fmt.Errorf("crowd: Fleiss' kappa undefined: no item has two or more labels")
	}
	var pe float64
	for c := range p {
		p[c] /= tot
		pe += p[c] * p[c]
	}
	po := sumP / wsum
	if pe >= 1-1e-12 {
		return Kappa{Po: po, Pe: pe, N: items}, fmt.Errorf("crowd: Fleiss' kappa undefined: every label is the same class")
	}
	return Kappa{Po: po, Pe: pe, Kappa: (po - pe) / (1 - pe), N: items}, nil
}

// Metric is the difference function of Krippendorff's alpha.
type Metric string

// The metrics of Krippendorff's alpha (Krippendorff 2011).
const (
	MetricNominal  Metric = "nominal"  // δ² = 0 if equal, else 1
	MetricOrdinal  Metric = "ordinal"  // δ²_ck = (Σ_{g=c..k} n_g − (n_c + n_k)/2)², classes in codebook order
	MetricInterval Metric = "interval" // δ² = (v_c − v_k)²
	MetricRatio    Metric = "ratio"    // δ² = ((v_c − v_k)/(v_c + v_k))²
)

// Metrics lists the four metrics of Krippendorff's alpha.
var Metrics = []Metric{MetricNominal, MetricOrdinal, MetricInterval, MetricRatio}

// KrippendorffAlpha is Krippendorff's alpha from per-item class counts
// (NItems×k row-major, as FleissKappa; missing labels are simply absent).
// values[c] is the number class c stands for under the interval and ratio
// metrics (nil means 1, 2, …, k). Items with fewer than two labels are not
// pairable and are left out. With the coincidences
// o_ck = Σ_u (n_uc·n_uk − [c = k]·n_uc)/(m_u − 1), n_c = Σ_k o_ck, n = Σ_c n_c:
//
//	α = 1 − (n − 1)·Σ_{c,k} o_ck δ²_ck / Σ_{c,k} n_c n_k δ²_ck.
//
// Fewer than two pairable values, or no expected disagreement (every value
// the same), is an error.
func KrippendorffAlpha(counts []int, k int, values []float64, m Metric) (float64, error) {
	if k < 1 || len(counts)%k != 0 {
		panic(fmt.Sprintf("crowd: KrippendorffAlpha: %d counts is not a multiple of k = %d", len(counts), k))
	}
	if values != nil && len(values) != k {
		panic(fmt.Sprintf("crowd: KrippendorffAlpha: %d values for %d classes", len(values), k))
	}
	return alphaW(counts, nil, k, values, m)
}

func alphaW(counts []int, w []float64, k int, values []float64, m Metric) (float64, error) {
	o := make([]float64, k*k)
	n := len(counts) / k
	for u := 0; u < n; u++ {
		wu := 1.0
		if w != nil {
			wu = w[u]
		}
		row := counts[u*k : (u+1)*k]
		var mu float64
		for _, v := range row {
			mu += float64(v)
		}
		if mu < 2 || wu == 0 {
			continue
		}
		f := wu / (mu - 1)
		for c, a := range row {
			if a == 0 {
				continue
			}
			for d, b := range row {
				if b == 0 {
					continue
				}
				x := float64(a) * float64(b)
				if c == d {
					x -= float64(a)
				}
				o[c*k+d] += f * x
			}
		}
	}
	nc := make([]float64, k)
	var tot float64
	for c := 0; c < k; c++ {
		for d := 0; d < k; d++ {
			nc[c] += o[c*k+d]
		}
		tot += nc[c]
	}
	if tot < 2 {
		return 0, fmt.Errorf("crowd: alpha undefined: fewer than two pairable values")
	}
	val := func(c int) float64 {
		if values == nil {
			return float64(c + 1)
		}
		return values[c]
	}
	delta := func(c, d int) float64 {
		switch m {
		case MetricNominal:
			if c == d {
				return 0
			}
			return 1
		case MetricOrdinal:
			lo, hi := min(c, d), max(c, d)
			var s float64
			for g := lo; g <= hi; g++ {
				s += nc[g]
			}
			s -= (nc[lo] + nc[hi]) / 2
			return s * s
		case MetricInterval:
			x := val(c) - val(d)
			return x * x
		case MetricRatio:
			s := val(c) + val(d)
			if s == 0 {
				return 0
			}
			x := (val(c) - val(d)) / s
			return x * x
		}
		panic(fmt.Sprintf("crowd: unknown metric %q", m))
	}
	var do, de float64
	for c := 0; c < k; c++ {
		for d := 0; d < k; d++ {
			dl := delta(c, d)
			do += o[c*k+d] * dl
			de += nc[c] * nc[d] * dl
		}
	}
	if de <= 0 {
		return 0, fmt.Errorf("crowd: alpha undefined: no expected disagreement (all values alike)")
	}
	return 1 - (tot-1)*do/de, nil
}

// ParseMetric returns the metric named s.
func ParseMetric(s string) (Metric, error) {
	for _, m := range Metrics {
		if string(m) == s {
			return m, nil
		}
	}
	return "", fmt.Errorf("crowd: unknown metric %q (want nominal, ordinal, interval or ratio)", s)
}

// Estimate is a statistic with a bootstrap 95% interval. Defined is false
// (and Value, Lo, Hi are 0) when the statistic is undefined for the data;
// Note says why. Lo and Hi are the 2.5th and 97.5th percentiles of Reps
// replicates that were defined (Reps == 0: no interval, Lo = Hi = Value).
type Estimate struct {
	Value   float64 `json:"value"`
	Lo      float64 `json:"lo"`
	Hi      float64 `json:"hi"`
	Reps    int     `json:"reps"`
	N       int     `json:"n"` // items used
	Defined bool    `json:"defined"`
	Note    string  `json:"note,omitempty"`
}

// bootstrap resamples n items with replacement reps times, passing each
// resample's multiplicities as weights to f. Replicate r draws from its own
// PCG stream (seed, r), so the result does not depend on how many goroutines
// (GOMAXPROCS) share the work; f must be safe for concurrent use.
func bootstrap(e *Estimate, n, reps int, seed uint64, f func(w []float64) (float64, error)) {
	e.Lo, e.Hi = e.Value, e.Value
	if !e.Defined || reps <= 0 || n == 0 {
		return
	}
	vals := make([]float64, reps)
	okv := make([]bool, reps)
	workers := max(1, min(runtime.GOMAXPROCS(0), reps))
	var wg sync.WaitGroup
	for wk := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := make([]float64, n)
			for r := wk; r < reps; r += workers {
				rng := rand.New(rand.NewPCG(seed, 0x6b6170706120+uint64(r)))
				clear(w)
				for range n {
					w[rng.IntN(n)]++
				}
				if v, err := f(w); err == nil && !math.IsNaN(v) {
					vals[r], okv[r] = v, true
				}
			}
		}()
	}
	wg.Wait()
	kept := vals[:0]
	for r, v := range vals {
		if okv[r] {
			kept = append(kept, v)
		}
	}
	if len(kept) == 0 {
		return
	}
	slices.Sort(kept)
	e.Lo = stat.Quantile(0.025, stat.Empirical, kept, nil)
	e.Hi = stat.Quantile(0.975, stat.Empirical, kept, nil)
	e.Reps = len(kept)
}

func estimate(v float64, n int, err error) Estimate {
	if err != nil {
		return Estimate{N: n, Note: err.Error()}
	}
	return Estimate{Value: v, N: n, Defined: true}
}

// AgreementOptions configures Agree.
type AgreementOptions struct {
	// Reps is the number of bootstrap replicates (0 means 1000; negative
	// means no intervals). Seed seeds them. Each replicate costs about as
	// much as computing every figure once (O(labels); about 0.1 s per
	// replicate per core at 4 million labels), so for tens of millions of
	// labels use 100–200 replicates or none. Replicates run on GOMAXPROCS
	// goroutines; the result does not depend on their number.
	Reps int
	Seed uint64
	// Values gives the number each class stands for under the interval and
	// ratio metrics (nil means 1, 2, …, NClasses).
	Values []float64
	// Pairs asks for Cohen's kappa of every pair of annotators sharing at
	// least MinShared items (0 means 10). Its cost grows with the square of
	// the labels per item.
	Pairs     bool
	MinShared int
}

// PairKappa is Cohen's kappa of two annotators over their shared items.
type PairKappa struct {
	A     int      `json:"a"`
	B     int      `json:"b"`
	Kappa Estimate `json:"kappa"`
}

// AnnotatorAgreement is one annotator's Cohen's kappa against the
// leave-one-out consensus: on each item they labelled, the majority vote of
// the other annotators (items where the others tie or nobody else labelled
// are left out).
type AnnotatorAgreement struct {
	Annotator int      `json:"annotator"`
	Kappa     Estimate `json:"kappa"`
}

// Agreement holds the agreement statistics of a set of labels.
type Agreement struct {
	Fleiss      Estimate             `json:"fleiss"`
	FleissPo    float64              `json:"fleiss_po"` // P̄
	FleissPe    float64              `json:"fleiss_pe"` // P̄e
	Alpha       map[Metric]Estimate  `json:"alpha"`
	Pairs       []PairKappa          `json:"pairs,omitempty"`
	LeaveOneOut []AnnotatorAgreement `json:"leave_one_out"`
}

// Agree computes Fleiss' kappa, Krippendorff's alpha under all four metrics,
// optionally Cohen's kappa for every pair of annotators, and each
// annotator's Cohen's kappa against the leave-one-out majority consensus,
// each with a bootstrap 95% interval over items (over the shared items for a
// pair, over the annotator's items for leave-one-out). Only each annotator's
// first label on an item (in input order) counts; run Clean first to choose
// which.
func Agree(l *Labels, o AgreementOptions) (*Agreement, error) {
	if err := l.Check(); err != nil {
		return nil, err
	}
	if l.Len() > math.MaxInt32 {
		return nil, fmt.Errorf("crowd: Agree handles at most %d labels, have %d", math.MaxInt32, l.Len())
	}
	k := l.NClasses
	if o.Values != nil && len(o.Values) != k {
		return nil, fmt.Errorf("crowd: %d class values given for %d classes", len(o.Values), k)
	}
	reps := o.Reps
	if reps == 0 {
		reps = 1000
	}
	minShared := o.MinShared
	if minShared <= 0 {
		minShared = 10
	}
	g := groupByItem(l, true)
	// First label per annotator per item, kept in item groups.
	type al struct {
		a int32
		c uint8
	}
	first := make([][]al, l.NItems)
	counts := make([]int, l.NItems*k)
	var scratch []al
	for i := 0; i < l.NItems; i++ {
		scratch = scratch[:0]
	next:
		for p := g.start[i]; p < g.start[i+1]; p++ {
			for _, x := range scratch {
				if x.a == g.ann[p] {
					continue next
				}
			}
			scratch = append(scratch, al{g.ann[p], g.cls[p]})
			counts[i*k+int(g.cls[p])]++
		}
		first[i] = slices.Clone(scratch)
	}
	out := &Agreement{Alpha: map[Metric]Estimate{}}
	fk, err := fleissW(counts, nil, k)
	out.Fleiss = estimate(fk.Kappa, fk.N, err)
	out.FleissPo, out.FleissPe = fk.Po, fk.Pe
	bootstrap(&out.Fleiss, l.NItems, reps, o.Seed, func(w []float64) (float64, error) {
		r, err := fleissW(counts, w, k)
		return r.Kappa, err
	})
	pairable := 0
	for i := range first {
		if len(first[i]) >= 2 {
			pairable++
		}
	}
	for mi, m := range Metrics {
		v, err := alphaW(counts, nil, k, o.Values, m)
		e := estimate(v, pairable, err)
		bootstrap(&e, l.NItems, reps, o.Seed+uint64(mi)+1, func(w []float64) (float64, error) {
			return alphaW(counts, w, k, o.Values, m)
		})
		out.Alpha[m] = e
	}
	if o.Pairs {
		type pair struct{ a, b int32 }
		shared := map[pair][][2]int{} // (class of a, class of b) per shared item
		for i := range first {
			f := first[i]
			for x := 0; x < len(f); x++ {
				for y := 0; y < len(f); y++ {
					if f[x].a < f[y].a {
						p := pair{f[x].a, f[y].a}
						shared[p] = append(shared[p], [2]int{int(f[x].c), int(f[y].c)})
					}
				}
			}
		}
		keys := make([]pair, 0, len(shared))
		for p, v := range shared {
			if len(v) >= minShared {
				keys = append(keys, p)
			}
		}
		sort.Slice(keys, func(i, j int) bool {
			if keys[i].a != keys[j].a {
				return keys[i].a < keys[j].a
			}
			return keys[i].b < keys[j].b
		})
		for pi, p := range keys {
			v := shared[p]
			x := make([]int, len(v))
			y := make([]int, len(v))
			for i, c := range v {
				x[i], y[i] = c[0], c[1]
			}
			kp, err := cohenW(x, y, nil, k)
			e := estimate(kp.Kappa, kp.N, err)
			bootstrap(&e, len(v), reps, o.Seed+uint64(pi)+100, func(w []float64) (float64, error) {
				r, err := cohenW(x, y, w, k)
				return r.Kappa, err
			})
			out.Pairs = append(out.Pairs, PairKappa{A: int(p.a), B: int(p.b), Kappa: e})
		}
	}
	// Leave-one-out: annotator's class vs the others' majority.
	xs := make([][]int, l.NAnnotators)
	ys := make([][]int, l.NAnnotators)
	row := make([]int, k)
	for i := range first {
		for _, f := range first[i] {
			copy(row, counts[i*k:(i+1)*k])
			row[f.c]--
			bc, ok := uniqueMode(row)
			if !ok {
				continue
			}
			xs[f.a] = append(xs[f.a], int(f.c))
			ys[f.a] = append(ys[f.a], bc)
		}
	}
	for a := 0; a < l.NAnnotators; a++ {
		kp, err := cohenW(xs[a], ys[a], nil, k)
		e := estimate(kp.Kappa, kp.N, err)
		bootstrap(&e, len(xs[a]), reps, o.Seed+uint64(a)+1<<32, func(w []float64) (float64, error) {
			r, err := cohenW(xs[a], ys[a], w, k)
			return r.Kappa, err
		})
		out.LeaveOneOut = append(out.LeaveOneOut, AnnotatorAgreement{Annotator: a, Kappa: e})
	}
	return out, nil
}

// uniqueMode returns the class with the most counts in row when it is the
// only one with that many and has at least one (ok false otherwise: no
// counts, or a tie), as the others' majority of a leave-one-out comparison.
func uniqueMode[T int | int32](row []T) (c int, ok bool) {
	var best T
	nb := 0
	c = -1
	for i, v := range row {
		if v > best {
			best, nb, c = v, 1, i
		} else if v == best && v > 0 {
			nb++
		}
	}
	return c, best > 0 && nb == 1
}
