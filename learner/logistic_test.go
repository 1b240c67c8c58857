package learner

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/floats"
)

// Source: R 4.2.2, glm(am ~ hp + wt, family = binomial, data = mtcars)
// (copied into testdata/README.md): intercept 18.86630, hp 0.0362556, wt −8.0834752,
// log-likelihood −5.029555. Data: testdata/learner/mtcars.csv (Motor Trend
// 1974, shipped with R as datasets::mtcars).
func TestLogisticMatchesRGlmMtcars(t *testing.T) {
	recs := readCSV(t, "../testdata/learner/mtcars.csv")
	if len(recs) != 32 {
		t.Fatalf("%d mtcars rows, want 32", len(recs))
	}
	var rows [][]float64
	var y []int
	for _, r := range recs {
		rows = append(rows, []float64{atof(t, r[2]), atof(t, r[3])})
		y = append(y, int(atof(t, r[1])))
	}
	X := dense(rows)
	m, err := Logistic{Lambda: 0, Tol: 1e-12, MaxIter: 5000}.Fit(X, oneHot(y, 2), nil)
	if err != nil {
		t.Fatal(err)
	}
	lm := m.(*LogisticModel)
	// For two classes the identified coefficients are the differences
	// between class 1's and class 0's weights.
	got := []float64{lm.B[1] - lm.B[0], lm.W[0*2+1] - lm.W[0*2+0], lm.W[1*2+1] - lm.W[1*2+0]}
	want := []float64{18.86630, 0.0362556, -8.0834752}
	for i := range want {
		if e := relErr(got[i], want[i]); e > 1e-4 {
			t.Errorf("coefficient %d: got %.7f, want %.7f (rel err %.2g)", i, got[i], want[i], e)
		}
	}
	if e := relErr(-lm.Objective, -5.029555); e > 1e-4 {
		t.Errorf("log-likelihood %.7f, want -5.029555", -lm.Objective)
	}
	p := m.PredictProba(X)
	finiteModel(t, p)
	var ll float64
	for i, c := range y {
		ll += math.Log(p[i][c])
	}
	if e := relErr(ll, -5.029555); e > 1e-4 {
		t.Errorf("log-likelihood from PredictProba %.7f, want -5.029555", ll)
	}
}

// Source: scikit-learn 1.2.1 LogisticRegression(C=1.0) (multinomial, lbfgs)
// on UCI iris (Fisher 1936), values copied into testdata/README.md. λ = 1/C = 1.
func TestLogisticMatchesSklearnIris(t *testing.T) {
	recs := readCSV(t, "../testdata/learner/iris.csv")
	var rows [][]float64
	var y []int
	for _, r := range recs {
		rows = append(rows, []float64{atof(t, r[0]), atof(t, r[1]), atof(t, r[2]), atof(t, r[3])})
		y = append(y, int(atof(t, r[4])))
	}
	X := dense(rows)
	m, err := Logistic{Lambda: 1, Tol: 1e-12, MaxIter: 5000}.Fit(X, oneHot(y, 3), nil)
	if err != nil {
		t.Fatal(err)
	}
	lm := m.(*LogisticModel)
	coef := [][]float64{{-0.4235, 0.9674, -2.5172, -1.0793}, {0.5344, -0.3217, -0.2063, -0.9443}, {-0.1109, -0.6457, 2.7235, 2.0236}}
	intercept := []float64{9.849, 2.2376, -12.0866}
	for c := 0; c < 3; c++ {
		for j := 0; j < 4; j++ {
			if got := lm.W[j*3+c]; math.Abs(got-coef[c][j]) > 1e-3 {
				t.Errorf("coef[%d][%d] = %.5f, want %.4f", c, j, got, coef[c][j])
			}
		}
		if math.Abs(lm.B[c]-intercept[c]) > 1e-3 {
			t.Errorf("intercept[%d] = %.5f, want %.4f", c, lm.B[c], intercept[c])
		}
	}
	p := m.PredictProba(X)
	finiteModel(t, p)
	wantP := map[int][]float64{0: {0.9816, 0.0184, 0.0}, 50: {0.0021, 0.8739, 0.1239}, 100: {0.0, 0.0039, 0.9961}}
	for i, w := range wantP {
		for c := range w {
			if math.Abs(p[i][c]-w[c]) > 1e-3 {
				t.Errorf("P(row %d) = %.4f, want %.4f", i, p[i], w)
				break
			}
		}
	}
	correct := 0
	for i, c := range y {
		if floats.MaxIdx(p[i]) == c {
			correct++
		}
	}
	if acc := float64(correct) / 150; math.Abs(acc-0.9733) > 1e-3 {
		t.Errorf("training accuracy %.4f, want 0.9733", acc)
	}
}

// Soft targets: a row with target (0.5, 0.5) weighs like two half rows, so
// duplicating a row with targets (1,0) and (0,1) gives the same fit as one
// row of weight 2 with (0.5, 0.5). Weights: weight 2 equals a duplicate.
func TestLogisticSoftTargetsAndWeights(t *testing.T) {
	base := [][]float64{{0, 1}, {1, 0.5}, {2, 2}, {3, 1.5}, {0.5, 0.2}}
	yb := []int{0, 0, 1, 1, 1}
	// Split row 4 into a hard 1/0 pair vs one soft row of weight 2.
	hardRows := append(append([][]float64{}, base...), base[4])
	hardT := oneHot(append(append([]int{}, yb[:4]...), 0, 1), 2)
	softT := oneHot(yb, 2)
	softT[4] = []float64{0.5, 0.5}
	w := []float64{1, 1, 1, 1, 2}
	l := Logistic{Lambda: 0.3, Tol: 1e-12, MaxIter: 1000}
	a, err := l.Fit(dense(hardRows), hardT, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := l.Fit(dense(base), softT, w)
	if err != nil {
		t.Fatal(err)
	}
	pa, pb := a.PredictProba(dense(base)), b.PredictProba(dense(base))
	for i := range pa {
		if math.Abs(pa[i][0]-pb[i][0]) > 1e-6 {
			t.Errorf("row %d: hard duplicate %.8f vs soft weighted %.8f", i, pa[i][0], pb[i][0])
		}
	}
}
