package crowd

import (
	"math"
)

// The hierarchical model (MethodHierarchical): Dawid–Skene with a prior on
// each annotator's confusion matrix that says "people are mostly right, each
// with their own skill, and they share their confusions", its strengths
// estimated from the data by empirical Bayes in every M-step.
//
// Notation: n_a[t][c] is annotator a's expected count of labels c on items
// of true class t (Σ over a's labels of the posterior T_it), n_a[t] = Σ_c
// n_a[t][c], and σ(x) = 1/(1+e^−x).
//
//  1. Pooled confusion (the crowd's, where a shared confusion shows):
//     m[t][c] = (Σ_a n_a[t][c] + 1 + [c = t]) / (Σ_a n_a[t] + K + 1),
//     a weak prior that favours the diagonal.
//  2. Skill: annotator a's log-odds offset δ_a on the pooled diagonal,
//     P(correct | t) = σ(logit m[t][t] + δ_a), fitted by solving
//     Σ_t n_a[t]·σ(L_t + δ) + σ(L̄ + δ) = Σ_t n_a[t][t] + ½ (L_t = logit m[t][t],
//     L̄ = Σ_t p_t L_t; the added half label keeps δ finite for an annotator
//     who is always or never right), with variance v_a = 1/I_a,
//     I_a = Σ_t n_a[t]·σ'(L_t + δ_a) + σ'(L̄ + δ_a).
//  3. Shrinkage of skills (random effects, DerSimonian & Laird 1986):
//     τ² over the annotators with labels and the random-effects mean δ̄ as
//     in derSimonianLaird, and δ*_a = δ̄ + (δ_a − δ̄)·τ²/(τ² + v_a): an
//     annotator with ten labels is pulled towards the crowd's skill, one
//     with hundreds keeps their own. τ² and δ̄ are estimated once, in the
//     first hierarchical M-step, and then held: EM starts with five
//     one-coin iterations (from label shares alone the posteriors are too
//     soft for the spread of skills to show), and re-estimating τ² from the
//     shrunk model's own, softer posteriors feeds on itself (on a simulated
//     crowd with accuracies 0.9/0.7/0.55 and 12 labels each, τ fell from
//     0.57 to 0 in ten iterations and accuracy from 0.90 to 0.87, below
//     one-coin's 0.89).
//  4. Prior mean of a's row t: μ_a[t][t] = σ(L_t + δ*_a) and, off the
//     diagonal, μ_a[t][c] = (1 − μ_a[t][t])·m[t][c]/(1 − m[t][t]): a's
//     mistakes are shaped like the crowd's.
//  5. Row strength β (one number, the pseudo-labels a row's prior is worth):
//     the maximiser over [2^−1, 2^12] of the Dirichlet–multinomial marginal likelihood of the rows,
//     Σ_a Σ_t [lnΓ(β) − lnΓ(n_a[t] + β) + Σ_c lnΓ(n_a[t][c] + βμ_a[t][c]) − lnΓ(βμ_a[t][c])]
//     (Minka 2000, "Estimating a Dirichlet distribution"; on at most 4,000
//     annotators spread evenly over the index when there are more),
//     estimated once, in the first hierarchical M-step (after the one-coin
//     warm-up, with τ² and δ̄), and then held, so the later steps are plain
//     MAP-EM steps. Re-estimating it from the model's own posteriors ran
//     away on sparse crowds: on simulated crowds with two classes and 5
//     labels a person (bench/crowd grid), β rose to the 2^12 bound by the
//     fourth M-step, the rows became their prior means, and EM slid to the
//     classes swapped (accuracy 0.20 against majority vote's 0.81).
//  6. Row estimate (posterior mean): π_a[t][c] = (n_a[t][c] + βμ_a[t][c]) / (n_a[t] + β).
//
// With few labels per annotator a row is mostly its prior mean (the crowd's
// confusion, tilted by a's skill, which is itself shrunk); with hundreds it is
// mostly a's own counts, as in Dawid–Skene. The prior pulls from the start,
// so EM does not wander off to the degenerate solutions plain Dawid–Skene
// finds on small sets. Related models: Raykar et al. 2010 (JMLR 11, priors
// on annotator matrices), Kim & Ghahramani 2012 (independent Bayesian
// classifier combination), Passonneau & Carpenter 2014 (TACL 2, hierarchical
// priors), Paun et al. 2018 (TACL 6, a comparison).

// HierPrior is what the hierarchical model's M-step estimated last: the
// strengths printed beside the consensus.
type HierPrior struct {
	// Pooled is the crowd's pooled confusion m, K×K, [true][given].
	Pooled []float64 `json:"pooled"`
	// SkillMean is δ̄ and SkillSD is τ, the spread of skills on the
	// log-odds scale.
	SkillMean float64 `json:"skill_mean"`
	SkillSD   float64 `json:"skill_sd"`
	// Beta is the row strength β in pseudo-labels.
	Beta float64 `json:"beta"`
	// Skill[a] is δ*_a, annotator a's shrunk log-odds offset.
	Skill []float64 `json:"-"`
}

const (
	hierMaxEB = 4000 // annotators used for β
	hierWarm  = 5    // one-coin iterations before the hierarchical M-step
)

// sigmoid is 1/(1+e^−x), with e^−|x| from expNeg (relative error below
// 1e-10): the skill fits call it for every annotator and class each M-step.
func sigmoid(x float64) float64 {
	if x >= 0 {
		return 1 / (1 + expNeg(-x))
	}
	e := expNeg(x)
	return e / (1 + e)
}

func logit(p float64) float64 { return math.Log(p / (1 - p)) }

// hierMstep estimates the prior from the reduced counts cnt (layout
// [a][given c][true t]) and the class prior p, and writes each annotator's
// prior mean into mu (layout [a][t][c]). It returns the estimate.
func hierMstep[F float](cnt []F, nA, k int, p []float64, mu []float64, workers int, prev *HierPrior, step int) *HierPrior {
	h := &HierPrior{Pooled: make([]float64, k*k), Skill: make([]float64, nA)}
	tot := make([]float64, k)
	for a := 0; a < nA; a++ {
		blk := cnt[a*k*k : (a+1)*k*k]
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				h.Pooled[t*k+c] += float64(blk[c*k+t])
			}
		}
	}
	for t := 0; t < k; t++ {
		var s float64
		for c := 0; c < k; c++ {
			s += h.Pooled[t*k+c]
		}
		tot[t] = s
		for c := 0; c < k; c++ {
			extra := 1.0
			if c == t {
				extra = 2
			}
			h.Pooled[t*k+c] = (h.Pooled[t*k+c] + extra) / (s + float64(k) + 1)
		}
	}
	L := make([]float64, k)
	var Lbar float64
	for t := 0; t < k; t++ {
		L[t] = logit(h.Pooled[t*k+t])
		Lbar += p[t] * L[t]
	}
	// Skills and their variances, in parallel over annotators.
	y := make([]float64, nA)
	v := make([]float64, nA)
	parallel(nA, workers, func(a0, a1 int) {
		nt := make([]float64, k)
		for a := a0; a < a1; a++ {
			blk := cnt[a*k*k : (a+1)*k*k]
			var n, right float64
			for t := 0; t < k; t++ {
				nt[t] = 0
				for c := 0; c < k; c++ {
					nt[t] += float64(blk[c*k+t])
				}
				n += nt[t]
				right += float64(blk[t*k+t])
			}
			if n <= 0 {
				v[a] = math.Inf(1)
				continue
			}
			y[a], v[a] = skillFit(nt, L, Lbar, right+0.5)
		}
	})
	var tau2 float64
	if prev == nil {
		h.SkillMean, tau2 = derSimonianLaird(y, v)
		h.SkillSD = math.Sqrt(tau2)
	} else {
		h.SkillMean, h.SkillSD = prev.SkillMean, prev.SkillSD
		tau2 = h.SkillSD * h.SkillSD
	}
	for a := 0; a < nA; a++ {
		d := h.SkillMean
		if !math.IsInf(v[a], 1) && tau2 > 0 {
			d += (y[a] - h.SkillMean) * tau2 / (tau2 + v[a])
		}
		h.Skill[a] = d
		m := mu[a*k*k : (a+1)*k*k]
		for t := 0; t < k; t++ {
			s := sigmoid(L[t] + d)
			off := (1 - s) / (1 - h.Pooled[t*k+t])
			for c := 0; c < k; c++ {
				if c == t {
					m[t*k+c] = s
				} else {
					m[t*k+c] = off * h.Pooled[t*k+c]
				}
			}
		}
	}
	if prev == nil {
		h.Beta = hierBeta(cnt, nA, k, mu, workers)
	} else {
		h.Beta = prev.Beta
	}
	return h
}

// derSimonianLaird is the random-effects estimate of DerSimonian & Laird
// (1986) for estimates y with sampling variances v (an infinite variance
// leaves its estimate out): with w = 1/v and the fixed-effect mean
// ȳ = Σwy/Σw, Q = Σw(y − ȳ)², τ² = max(0, (Q − (n−1))/(Σw − Σw²/Σw)), and
// the random-effects mean μ = Σ y/(v+τ²) / Σ 1/(v+τ²). With fewer than two
// estimates τ² = 0.
func derSimonianLaird(y, v []float64) (mu, tau2 float64) {
	var sw, sw2, swy float64
	var n int
	for i := range y {
		if math.IsInf(v[i], 1) {
			continue
		}
		w := 1 / v[i]
		sw += w
		sw2 += w * w
		swy += w * y[i]
		n++
	}
	if n == 0 || sw == 0 {
		return 0, 0
	}
	fe := swy / sw
	var q float64
	for i := range y {
		if !math.IsInf(v[i], 1) {
			d := y[i] - fe
			q += d * d / v[i]
		}
	}
	if n > 1 && sw-sw2/sw > 0 {
		tau2 = max(0, (q-float64(n-1))/(sw-sw2/sw))
	}
	var a, b float64
	for i := range y {
		if !math.IsInf(v[i], 1) {
			w := 1 / (v[i] + tau2)
			a += w * y[i]
			b += w
		}
	}
	return a / b, tau2
}

// skillFit solves Σ_t n_t σ(L_t+δ) + σ(L̄+δ) = right for δ by safeguarded
// Newton steps and returns δ and 1/I(δ).
func skillFit(nt, L []float64, Lbar, right float64) (float64, float64) {
	f := func(d float64) (g, dg float64) {
		for t, n := range nt {
			if n == 0 {
				continue
			}
			s := sigmoid(L[t] + d)
			g += n * s
			dg += n * s * (1 - s)
		}
		s := sigmoid(Lbar + d)
		return g + s - right, dg + s*(1-s)
	}
	lo, hi, d := -20.0, 20.0, 0.0
	for it := 0; it < 60; it++ {
		g, dg := f(d)
		if g > 0 {
			hi = d
		} else {
			lo = d
		}
		if math.Abs(g) < 1e-10 {
			break
		}
		nd := d - g/dg
		if !(nd > lo && nd < hi) || dg <= 0 {
			nd = (lo + hi) / 2
		}
		d = nd
		if hi-lo < 1e-12 {
			break
		}
	}
	_, dg := f(d)
	return d, 1 / dg
}

// hierBeta picks β by the Dirichlet–multinomial marginal likelihood of the
// rows (step 5 of the model): golden-section search on log₂ β over [−1, 12]
// to within 0.05, the likelihood being unimodal in practice.
func hierBeta[F float](cnt []F, nA, k int, mu []float64, workers int) float64 {
	step := max(1, (nA+hierMaxEB-1)/hierMaxEB)
	var use []int
	for a := 0; a < nA; a += step {
		use = append(use, a)
	}
	score := func(lb float64) float64 {
		b := math.Exp2(lb)
		lgb, _ := math.Lgamma(b)
		part := make([]float64, max(1, workers))
		parallel(len(use), workers, func(u0, u1 int) {
			var s float64
			for _, a := range use[u0:u1] {
				blk := cnt[a*k*k : (a+1)*k*k]
				m := mu[a*k*k : (a+1)*k*k]
				for t := 0; t < k; t++ {
					var n float64
					for c := 0; c < k; c++ {
						x := float64(blk[c*k+t])
						if x <= 0 {
							continue
						}
						n += x
						bm := b * m[t*k+c]
						l1, _ := math.Lgamma(x + bm)
						l2, _ := math.Lgamma(bm)
						s += l1 - l2
					}
					if n > 0 {
						l, _ := math.Lgamma(n + b)
						s += lgb - l
					}
				}
			}
			part[u0*len(part)/max(1, len(use))] += s
		})
		var s float64
		for _, v := range part {
			s += v
		}
		return s
	}
	const gr = 0.6180339887498949
	lo, hi := -1.0, 12.0
	x1, x2 := hi-gr*(hi-lo), lo+gr*(hi-lo)
	f1, f2 := score(x1), score(x2)
	for hi-lo > 0.05 {
		if f1 >= f2 {
			hi, x2, f2 = x2, x1, f1
			x1 = hi - gr*(hi-lo)
			f1 = score(x1)
		} else {
			lo, x1, f1 = x1, x2, f2
			x2 = lo + gr*(hi-lo)
			f2 = score(x2)
		}
	}
	return math.Exp2((lo + hi) / 2)
}

// parallel runs f on [0,n) split into at most workers contiguous ranges.
func parallel(n, workers int, f func(lo, hi int)) {
	w := max(1, min(workers, n/64))
	if w == 1 {
		f(0, n)
		return
	}
	done := make(chan struct{}, w)
	for i := 0; i < w; i++ {
		go func() { f(n*i/w, n*(i+1)/w); done <- struct{}{} }()
	}
	for i := 0; i < w; i++ {
		<-done
	}
}
