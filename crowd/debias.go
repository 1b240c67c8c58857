package crowd

import (
	"fmt"
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/gonum/stat"
)

// Strata assigns items to the strata of a covariate: Of[i] is item i's
// stratum (an index into Names) or -1 when its value is missing.
type Strata struct {
	Of    []int
	Names []string
}

// CategoricalStrata makes one stratum per distinct non-empty value, named by
// the value, in sorted order ("" is missing).
func CategoricalStrata(values []string) Strata {
	var names []string
	seen := map[string]bool{}
	for _, v := range values {
		if v != "" && !seen[v] {
			seen[v] = true
			names = append(names, v)
		}
	}
	slices.Sort(names)
	idx := make(map[string]int, len(names))
	for i, n := range names {
		idx[n] = i
	}
	s := Strata{Of: make([]int, len(values)), Names: names}
	for i, v := range values {
		if v == "" {
			s.Of[i] = -1
		} else {
			s.Of[i] = idx[v]
		}
	}
	return s
}

// NumericStrata bins values by the cut points edges, which must be finite
// and strictly increasing: stratum 0 is (−∞, edges[0]), stratum j is
// [edges[j−1], edges[j]) and the last is [edges[len−1], ∞). NaN is missing.
func NumericStrata(values, edges []float64) (Strata, error) {
	if len(edges) == 0 {
		return Strata{}, fmt.Errorf("crowd: numeric strata need at least one cut point")
	}
	for j, e := range edges {
		if math.IsNaN(e) || math.IsInf(e, 0) || (j > 0 && e <= edges[j-1]) {
			return Strata{}, fmt.Errorf("crowd: cut points must be finite and strictly increasing; cut %d is %v", j, e)
		}
	}
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	names := []string{"<" + f(edges[0])}
	for j := 1; j < len(edges); j++ {
		names = append(names, "["+f(edges[j-1])+","+f(edges[j])+")")
	}
	names = append(names, "≥"+f(edges[len(edges)-1]))
	s := Strata{Of: make([]int, len(values)), Names: names}
	for i, v := range values {
		if math.IsNaN(v) {
			s.Of[i] = -1
			continue
		}
		s.Of[i] = sortSearchFloat(edges, v)
	}
	return s, nil
}

// sortSearchFloat returns the number of edges ≤ v.
func sortSearchFloat(edges []float64, v float64) int {
	lo, hi := 0, len(edges)
	for lo < hi {
		m := (lo + hi) / 2
		if edges[m] <= v {
			lo = m + 1
		} else {
			hi = m
		}
	}
	return lo
}

// QuantileStrata bins values into n strata of about equal size, cutting at
// the empirical quantiles j/n, j = 1…n−1 (gonum stat.Quantile, Empirical);
// repeated cut points are merged, so there may be fewer than n strata. NaN is
// missing.
func QuantileStrata(values []float64, n int) (Strata, error) {
	if n < 2 {
		return Strata{}, fmt.Errorf("crowd: quantile strata need n ≥ 2, have %d", n)
	}
	var xs []float64
	for _, v := range values {
		if !math.IsNaN(v) {
			if math.IsInf(v, 0) {
				return Strata{}, fmt.Errorf("crowd: covariate value %v is not finite", v)
			}
			xs = append(xs, v)
		}
	}
	if len(xs) == 0 {
		return Strata{}, fmt.Errorf("crowd: no covariate values to bin")
	}
	slices.Sort(xs)
	var edges []float64
	for j := 1; j < n; j++ {
		e := stat.Quantile(float64(j)/float64(n), stat.Empirical, xs, nil)
		if e > xs[0] && (len(edges) == 0 || e > edges[len(edges)-1]) {
			edges = append(edges, e)
		}
	}
	if len(edges) == 0 {
		return Strata{}, fmt.Errorf("crowd: every covariate value is %v; nothing to bin", xs[0])
	}
	return NumericStrata(values, edges)
}

// DebiasOptions configures Debias.
type DebiasOptions struct {
	// Gold holds expert classes per item (-1 none). When any item has gold,
	// the confusion per stratum is estimated against gold.
	Gold []int
	// Reference is the stratum whose consensus is taken as unbiased when
	// there is no gold (-1: none).
	Reference int
	// Smoothing is the pseudo-count pulling each gold-estimated confusion row
	// towards "no confusion" (0 means 1).
	Smoothing float64
	// Prior is the class prior the posterior was computed with
	// (Result.Prior); nil means the mean posterior over all items, which is
	// what Dawid–Skene converges to.
	Prior []float64
}

// Debiased is the result of Debias. Per stratum s: Confusion[s] is the K×K
// matrix P(consensus class c | true class t, s) row-major [t][c]; Mix[s] the
// true class mix used; Before[s] and After[s] the mean posterior over the
// stratum's items before and after the correction; Items[s] and Gold[s] the
// number of items and of gold items. A stratum with no items has all-zero
// rows.
type Debiased struct {
	Method    string // "gold" or "reference"
	Posterior []float64
	Confusion [][]float64
	Mix       [][]float64
	Before    [][]float64
	After     [][]float64
	Items     []int
	Gold      []int
}

// Debias corrects a bias every annotator shares and that depends on a
// covariate (at low magnification chains look like rods to everyone), which
// combining cannot remove. post is the consensus posterior (NItems×k, e.g.
// Result.Posterior); it is not modified.
//
// Model: within stratum s everyone perceives an item of true class t as
// class c with probability C_s[t][c], and labels it from what they perceive;
// the true classes have mix π_s. The consensus posterior q_i was computed
// under a prior ρ (DebiasOptions.Prior), so the labels' likelihood of the
// perceived class c is proportional to q_ic/ρ_c, and Bayes' rule gives the
// corrected posterior
//
//	p_it ∝ π_s[t] · Σ_c C_s[t][c] q_ic/ρ_c.
//
// With gold (any Gold[i] ≥ 0): C_s[t] is estimated from the gold items of
// stratum s as (Σ_{gold i = t} q_i + α e_t)/(n_st + α), α = Smoothing, so a
// class with no gold in the stratum is left uncorrected; π_s is estimated by
// EM on the stratum's items (Saerens, Latinne & Decaestecker 2002), gold items
// counted at their expert class. Gold items get their expert class.
//
// Without gold, against a reference stratum r: the consensus in r is taken
// as unbiased (C_r = I) and the true class mix is assumed not to depend on
// the covariate, so π_s = m_r, the mean consensus posterior in r, for every
// s. Then C_s must satisfy π·C_s = m_s (the stratum's mean consensus
// posterior), which alone does not determine it; Debias takes the
// minimal-flow solution: a class whose share fell (m_s[t] < π[t]) keeps
// m_s[t]/π[t] of its items and sends the rest to the classes whose share
// rose, in proportion to their rise; other classes are not confused. With one
// losing and one gaining class (chains seen as rods) this is exactly the
// shared bias. The corrected shares of every stratum then equal π: the
// correction moves individual items, and the assumption carries the shares.
func Debias(post []float64, k int, s Strata, o DebiasOptions) (*Debiased, error) {
	if k < 2 {
		return nil, fmt.Errorf("crowd: debias needs at least 2 classes, have %d", k)
	}
	n := len(s.Of)
	if len(post) != n*k {
		panic(fmt.Sprintf("crowd: posterior has %d entries, want %d items × %d classes", len(post), n, k))
	}
	if err := checkGold(o.Gold, n, k); err != nil {
		return nil, err
	}
	ns := len(s.Names)
	for i, v := range s.Of {
		if v < -1 || v >= ns {
			return nil, fmt.Errorf("crowd: item %d is in stratum %d; there are %d strata", i, v, ns)
		}
	}
	for i := 0; i < n; i++ {
		for c := 0; c < k; c++ {
			if v := post[i*k+c]; !(v >= 0 && v <= 1) {
				return nil, fmt.Errorf("crowd: posterior of item %d class %d is %v, not a probability", i, c, v)
			}
		}
	}
	alpha := o.Smoothing
	if alpha == 0 {
		alpha = 1
	}
	if alpha < 0 || math.IsNaN(alpha) || math.IsInf(alpha, 0) {
		return nil, fmt.Errorf("crowd: debias smoothing %v must be a finite number > 0", o.Smoothing)
	}
	rho := o.Prior
	if rho == nil {
		rho = make([]float64, k)
		for i := 0; i < n; i++ {
			for c := 0; c < k; c++ {
				rho[c] += post[i*k+c] / float64(n)
			}
		}
	} else if len(rho) != k {
		panic(fmt.Sprintf("crowd: debias prior has %d classes, want %d", len(rho), k))
	}
	// lik holds q_ic/ρ_c, the labels' likelihood of each perceived class up
	// to a factor per item.
	lik := make([]float64, n*k)
	for i := 0; i < n; i++ {
		for c := 0; c < k; c++ {
			if rho[c] > 0 {
				lik[i*k+c] = post[i*k+c] / rho[c]
			}
		}
	}
	d := &Debiased{Posterior: append([]float64(nil), post...),
		Confusion: make([][]float64, ns), Mix: make([][]float64, ns),
		Before: make([][]float64, ns), After: make([][]float64, ns),
		Items: make([]int, ns), Gold: make([]int, ns)}
	members := make([][]int, ns)
	for i, v := range s.Of {
		if v >= 0 {
			members[v] = append(members[v], i)
			d.Items[v]++
			if goldOf(o.Gold, i) >= 0 {
				d.Gold[v]++
			}
		}
	}
	mean := func(p []float64, items []int) []float64 {
		m := make([]float64, k)
		for _, i := range items {
			for c := 0; c < k; c++ {
				m[c] += p[i*k+c]
			}
		}
		for c := range m {
			if len(items) > 0 {
				m[c] /= float64(len(items))
			}
		}
		return m
	}
	for st := range ns {
		d.Before[st] = mean(post, members[st])
	}
	hasGold := false
	for _, g := range o.Gold {
		hasGold = hasGold || g >= 0
	}
	switch {
	case hasGold:
		d.Method = "gold"
		for st := range ns {
			d.Confusion[st], d.Mix[st] = goldConfusion(post, lik, k, members[st], o.Gold, alpha)
		}
	case o.Reference >= 0:
		if o.Reference >= ns {
			return nil, fmt.Errorf("crowd: reference stratum %d does not exist; there are %d strata", o.Reference, ns)
		}
		if d.Items[o.Reference] == 0 {
			return nil, fmt.Errorf("crowd: reference stratum %q has no items", s.Names[o.Reference])
		}
		d.Method = "reference"
		pi := d.Before[o.Reference]
		for st := range ns {
			d.Mix[st] = append([]float64(nil), pi...)
			if st == o.Reference || d.Items[st] == 0 {
				d.Confusion[st] = identity(k)
				continue
			}
			d.Confusion[st] = minimalFlow(pi, d.Before[st])
		}
	default:
		return nil, fmt.Errorf("crowd: debiasing needs gold items or a reference stratum (a stratum whose consensus you trust)")
	}
	for st := range ns {
		for _, i := range members[st] {
			if g := goldOf(o.Gold, i); g >= 0 {
				row := d.Posterior[i*k : (i+1)*k]
				clear(row)
				row[g] = 1
				continue
			}
			bayes(d.Posterior[i*k:(i+1)*k], lik[i*k:(i+1)*k], post[i*k:(i+1)*k], d.Mix[st], d.Confusion[st])
		}
		d.After[st] = mean(d.Posterior, members[st])
	}
	return d, nil
}

func identity(k int) []float64 {
	m := make([]float64, k*k)
	for t := 0; t < k; t++ {
		m[t*k+t] = 1
	}
	return m
}

// bayes writes p_t ∝ π_t Σ_c C[t][c] lik_c into dst; when every term is 0
// it keeps q.
func bayes(dst, lik, q, pi, conf []float64) {
	k := len(q)
	var z float64
	for t := 0; t < k; t++ {
		var l float64
		for c := 0; c < k; c++ {
			l += conf[t*k+c] * lik[c]
		}
		dst[t] = pi[t] * l
		z += dst[t]
	}
	if z <= 0 {
		copy(dst, q)
		return
	}
	for t := range dst {
		dst[t] /= z
	}
}

// minimalFlow returns the confusion C with π·C = m that moves the least
// mass: losing classes keep m/π of their items and send the rest to gaining
// classes in proportion to their gain.
func minimalFlow(pi, m []float64) []float64 {
	k := len(pi)
	c := identity(k)
	var flow float64
	gain := make([]float64, k)
	for t := 0; t < k; t++ {
		if g := m[t] - pi[t]; g > 0 {
			gain[t] = g
			flow += g
		}
	}
	if flow <= 1e-12 {
		return c
	}
	for t := 0; t < k; t++ {
		loss := pi[t] - m[t]
		if loss <= 0 || pi[t] <= 0 {
			continue
		}
		out := loss / pi[t]
		c[t*k+t] = 1 - out
		for u := 0; u < k; u++ {
			if gain[u] > 0 {
				c[t*k+u] = out * gain[u] / flow
			}
		}
	}
	return c
}

// goldConfusion estimates one stratum's confusion from its gold items and
// its true class mix by EM (Saerens et al. 2002).
func goldConfusion(post, lik []float64, k int, items []int, gold []int, alpha float64) (conf, mix []float64) {
	conf = make([]float64, k*k)
	nt := make([]float64, k)
	for _, i := range items {
		if g := gold[i]; g >= 0 {
			nt[g]++
			for c := 0; c < k; c++ {
				conf[g*k+c] += post[i*k+c]
			}
		}
	}
	for t := 0; t < k; t++ {
		conf[t*k+t] += alpha
		for c := 0; c < k; c++ {
			conf[t*k+c] /= nt[t] + alpha
		}
	}
	mix = make([]float64, k)
	if len(items) == 0 {
		return conf, mix
	}
	for _, i := range items {
		for c := 0; c < k; c++ {
			mix[c] += post[i*k+c]
		}
	}
	for c := range mix {
		mix[c] /= float64(len(items))
	}
	next := make([]float64, k)
	w := make([]float64, k)
	for range 1000 {
		clear(next)
		for _, i := range items {
			if g := gold[i]; g >= 0 {
				next[g]++
				continue
			}
			bayes(w, lik[i*k:(i+1)*k], post[i*k:(i+1)*k], mix, conf)
			for t := range w {
				next[t] += w[t]
			}
		}
		var change float64
		for t := range next {
			next[t] /= float64(len(items))
			change = max(change, math.Abs(next[t]-mix[t]))
		}
		copy(mix, next)
		if change < 1e-10 {
			break
		}
	}
	return conf, mix
}
