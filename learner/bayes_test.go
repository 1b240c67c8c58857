package learner

import (
	"math"
	"testing"

	"handoff/features"
)

// Source: Manning, Raghavan & Schütze (2008), Introduction to Information
// Retrieval, Example 13.1 (copied into testdata/README.md): multinomial naive Bayes
// with add-one smoothing gives P(c|d5) = 0.6898 for d5 = "Chinese Chinese
// Chinese Tokyo Japan"; unnormalised P(c)∏P(t|c) = 0.000301214 and
// 0.000135481 (scikit-learn's exact figures; the book rounds to 0.0003 and
// 0.0001). Term counts by hand; vocabulary Chinese, Beijing, Shanghai,
// Macao, Tokyo, Japan.
func TestBayesManningExample13_1(t *testing.T) {
	train := [][]float64{
		{2, 1, 0, 0, 0, 0}, // d1 "Chinese Beijing Chinese", c
		{2, 0, 1, 0, 0, 0}, // d2 "Chinese Chinese Shanghai", c
		{1, 0, 0, 1, 0, 0}, // d3 "Chinese Macao", c
		{1, 0, 0, 0, 1, 1}, // d4 "Tokyo Japan Chinese", not c
	}
	m, err := Bayes{}.Fit(dense(train), oneHot([]int{0, 0, 0, 1}, 2), nil)
	if err != nil {
		t.Fatal(err)
	}
	test := dense([][]float64{{3, 0, 0, 0, 1, 1}})
	p := m.PredictProba(test)
	if math.Abs(p[0][0]-0.6898) > 5e-5 {
		t.Errorf("P(c|d5) = %.5f, want 0.6898", p[0][0])
	}
	bm := m.(*BayesModel)
	score := func(c int) float64 {
		s := bm.LogPrior[c]
		for j, x := range test.Data {
			s += x * bm.LogProb[j*2+c]
		}
		return math.Exp(s)
	}
	if e := relErr(score(0), 0.000301214); e > 1e-5 {
		t.Errorf("P(c)∏P(t|c) = %.9f, want 0.000301214", score(0))
	}
	if e := relErr(score(1), 0.000135481); e > 1e-5 {
		t.Errorf("P(not c)∏P(t|not c) = %.9f, want 0.000135481", score(1))
	}
	// The same counts as a sparse matrix give the same answer.
	csr := &features.CSR{NRows: 1, NCols: 6, Indptr: []int{0, 3}, Indices: []int32{0, 4, 5}, Data: []float64{3, 1, 1}}
	if q := m.PredictProba(csr); math.Abs(q[0][0]-p[0][0]) > 1e-12 {
		t.Errorf("sparse %.12f vs dense %.12f", q[0][0], p[0][0])
	}
}

// Soft targets count as fractional documents: a document with target
// (0.5, 0.5) adds half its counts to each class.
func TestBayesSoftTargets(t *testing.T) {
	X := dense([][]float64{{2, 0}, {0, 2}, {1, 1}, {1, 1}})
	hard, _ := Bayes{Alpha: 0.5}.Fit(X, [][]float64{{1, 0}, {0, 1}, {1, 0}, {0, 1}}, nil)
	soft, _ := Bayes{Alpha: 0.5}.Fit(dense([][]float64{{2, 0}, {0, 2}, {1, 1}}), [][]float64{{1, 0}, {0, 1}, {0.5, 0.5}}, []float64{1, 1, 2})
	a, b := hard.(*BayesModel), soft.(*BayesModel)
	for i := range a.LogProb {
		if math.Abs(a.LogProb[i]-b.LogProb[i]) > 1e-12 {
			t.Fatalf("log P(j|c) differ: %v vs %v", a.LogProb, b.LogProb)
		}
	}
	for c := range a.LogPrior {
		if math.Abs(a.LogPrior[c]-b.LogPrior[c]) > 1e-12 {
			t.Fatalf("priors differ: %v vs %v", a.LogPrior, b.LogPrior)
		}
	}
}
