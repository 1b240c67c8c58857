package crowd

import (
	"math"
	"testing"
)

// TestDerSimonianLairdBCG reproduces the random-effects meta-analysis of the
// BCG vaccine trials (Colditz et al. 1994, 13 trials, log risk ratios) with
// the DerSimonian & Laird (1986) estimator, as in the reference library
// metafor (Viechtbauer 2010, J. Stat. Softw. 36(3); its test
// test_misc_metan_vs_rma.uni_with_dat.bcg: rma(yi, vi, method="DL") gives
// estimate −0.7141; tau² = 0.3088 in its printed output).
func TestDerSimonianLairdBCG(t *testing.T) {
	// tpos, tneg, cpos, cneg of each trial (metafor's dat.bcg).
	trials := [][4]float64{
		{4, 119, 11, 128}, {6, 300, 29, 274}, {3, 228, 11, 209}, {62, 13536, 248, 12619},
		{33, 5036, 47, 5761}, {180, 1361, 372, 1079}, {8, 2537, 10, 619}, {505, 87886, 499, 87892},
		{29, 7470, 45, 7232}, {17, 1699, 65, 1600}, {186, 50448, 141, 27197}, {5, 2493, 3, 2338},
		{27, 16886, 29, 17825},
	}
	var y, v []float64
	for _, x := range trials {
		a, b, c, d := x[0], x[1], x[2], x[3]
		y = append(y, math.Log(a/(a+b))-math.Log(c/(c+d)))
		v = append(v, 1/a-1/(a+b)+1/c-1/(c+d))
	}
	mu, tau2 := derSimonianLaird(y, v)
	if math.Abs(mu-(-0.7141)) > 5e-5 || math.Abs(tau2-0.3088) > 5e-5 {
		t.Errorf("DerSimonian–Laird on the BCG trials: estimate %.4f, τ² %.4f; metafor gives −0.7141 and 0.3088", mu, tau2)
	}
	// An infinite variance leaves its estimate out.
	mu2, tau22 := derSimonianLaird(append(y, 100), append(v, math.Inf(1)))
	if mu2 != mu || tau22 != tau2 {
		t.Errorf("an estimate with infinite variance changed the result: %v %v", mu2, tau22)
	}
}

// TestSpammerScore checks the score against Raykar & Yu (2012, JMLR 13):
// for two classes it is (α + β − 1)² with α the sensitivity and β the
// specificity (their section 3), 0 for any annotator whose rows are equal
// and 1 for a perfect one.
func TestSpammerScore(t *testing.T) {
	cases := []struct {
		name string
		k    int
		conf []float64
		want float64
	}{
		{"binary α=.9 β=.8", 2, []float64{0.8, 0.2, 0.1, 0.9}, math.Pow(0.9+0.8-1, 2)},
		{"binary α=.3 β=.6 (worse than chance)", 2, []float64{0.6, 0.4, 0.7, 0.3}, math.Pow(0.3+0.6-1, 2)},
		{"perfect 3", 3, []float64{1, 0, 0, 0, 1, 0, 0, 0, 1}, 1},
		{"random 3", 3, []float64{1. / 3, 1. / 3, 1. / 3, 1. / 3, 1. / 3, 1. / 3, 1. / 3, 1. / 3, 1. / 3}, 0},
		{"one class 3", 3, []float64{0, 1, 0, 0, 1, 0, 0, 1, 0}, 0},
	}
	for _, c := range cases {
		if got := SpammerScore(c.conf, c.k); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("%s: score %v, want %v", c.name, got, c.want)
		}
	}
}

// TestHierarchicalShrinks checks the model at both ends, 12 and 300 labels
// per annotator: EM converges, a prior is estimated, and the estimated skills
// order as the simulated accuracies do. Simulated data.
func TestHierarchicalShrinks(t *testing.T) {
	for _, tc := range []struct{ per int }{{300}, {12}} {
		s := simulate(simConfig{items: 3000, annotators: 3000 * 4 / tc.per, perItem: 4, classes: 3, seed: 7,
			acc: func(a int) float64 { return []float64{0.9, 0.7, 0.55}[a%3] }})
		r, err := Hierarchical(s.labels, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if !r.Converged {
			t.Errorf("%d labels per annotator: EM did not converge in %d iterations", tc.per, r.Iterations)
		}
		if r.Hier == nil || r.Hier.Beta <= 0 || math.IsNaN(r.Hier.SkillSD) {
			t.Fatalf("no estimated prior: %+v", r.Hier)
		}
		// Skills must order as the simulated accuracies do, on average.
		var sk [3]float64
		var n [3]int
		for a, d := range r.Hier.Skill {
			sk[a%3] += d
			n[a%3]++
		}
		for g := range sk {
			sk[g] /= float64(n[g])
		}
		if !(sk[0] > sk[1] && sk[1] > sk[2]) {
			t.Errorf("%d labels per annotator: mean skills %v do not follow the accuracies 0.9 > 0.7 > 0.55", tc.per, sk)
		}
		ok := 0
		for i, c := range r.Class {
			if c == s.truth[i] {
				ok++
			}
		}
		t.Logf("%d labels per annotator: β %.3g, τ %.2f, accuracy %.3f, %d iterations", tc.per, r.Hier.Beta, r.Hier.SkillSD, float64(ok)/float64(len(r.Class)), r.Iterations)
	}
}
