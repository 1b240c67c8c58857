package learner

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/floats"
)

// twoBlobs returns n points per class around (±1, ±1) with noise.
func twoBlobs(n int, seed uint64) ([][]float64, []int) {
	rng := rand.New(rand.NewPCG(seed, 1))
	var X [][]float64
	var y []int
	for i := 0; i < 2*n; i++ {
		c := i % 2
		s := float64(2*c - 1)
		X = append(X, []float64{s + rng.NormFloat64()*0.7, s + rng.NormFloat64()*0.7, rng.NormFloat64()})
		y = append(y, c)
	}
	return X, y
}

func TestForestSeparatesAndIsDeterministic(t *testing.T) {
	Xr, y := twoBlobs(150, 7)
	X := dense(Xr)
	T := oneHot(y, 2)
	a, err := Forest{Trees: 30, Seed: 3, Threads: 1}.Fit(X, T, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Forest{Trees: 30, Seed: 3, Threads: 2}.Fit(X, T, nil)
	if err != nil {
		t.Fatal(err)
	}
	Xt, yt := twoBlobs(200, 8)
	pa, pb := a.PredictProba(dense(Xt)), b.PredictProba(dense(Xt))
	finiteModel(t, pa)
	hit := 0
	for i := range pa {
		if !slices.Equal(pa[i], pb[i]) {
			t.Fatalf("row %d: same seed, different forests: %v vs %v", i, pa[i], pb[i])
		}
		if floats.MaxIdx(pa[i]) == yt[i] {
			hit++
		}
	}
	// Bayes error of these blobs is about 2.2% (common practice, no source:
	// the classes overlap at ±1 with σ 0.7 along the diagonal).
	if acc := float64(hit) / float64(len(yt)); acc < 0.9 {
		t.Errorf("held-out accuracy %.3f, want ≥ 0.9", acc)
	}
	c, _ := Forest{Trees: 30, Seed: 4}.Fit(X, T, nil)
	if pc := c.PredictProba(dense(Xt)); slices.Equal(pc[0], pa[0]) && slices.Equal(pc[1], pa[1]) && slices.Equal(pc[2], pa[2]) {
		t.Errorf("different seeds gave identical forests")
	}
}

// A single tree on all rows (bootstrap aside) must fit a pure split
// exactly, and soft targets must show in the leaf probabilities.
func TestForestSoftTargetsInLeaves(t *testing.T) {
	X := dense([][]float64{{0}, {0}, {1}, {1}})
	T := [][]float64{{0.8, 0.2}, {0.8, 0.2}, {0.1, 0.9}, {0.1, 0.9}}
	m, err := Forest{Trees: 50, Seed: 1}.Fit(X, T, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Each leaf holds rows of one x value only (a pure split exists), so
	// its probabilities are exactly that value's soft target.
	for _, tr := range m.(*ForestModel).Trees {
		for l := 0; l < len(tr.Prob); l += 2 {
			p := tr.Prob[l : l+2]
			if !(math.Abs(p[0]-0.8) < 1e-12 && math.Abs(p[1]-0.2) < 1e-12) && !(math.Abs(p[0]-0.1) < 1e-12 && math.Abs(p[1]-0.9) < 1e-12) {
				t.Fatalf("leaf %v is not a soft target", p)
			}
		}
	}
	p := m.PredictProba(dense([][]float64{{0}, {1}}))
	if !(p[0][0] > 0.5 && p[1][1] > 0.5) {
		t.Errorf("forest predictions %v", p)
	}
}

// A zero-variance column must not change the forest or bring NaN.
func TestForestIgnoresConstantColumn(t *testing.T) {
	Xr, y := twoBlobs(60, 9)
	withConst := make([][]float64, len(Xr))
	for i, r := range Xr {
		withConst[i] = append([]float64{5}, r...)
	}
	m, err := Forest{Trees: 20, Seed: 2, MaxFeatures: 4}.Fit(dense(withConst), oneHot(y, 2), nil)
	if err != nil {
		t.Fatal(err)
	}
	finiteModel(t, m.PredictProba(dense(withConst)))
	for _, tr := range m.(*ForestModel).Trees {
		for _, f := range tr.Feature {
			if f == 0 {
				t.Fatal("a tree split on the constant column")
			}
		}
	}
}
