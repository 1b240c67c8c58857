package learner

import (
	"errors"
	"math"
	"strings"
	"testing"

	"handoff/features"
)

// Bad input gets a clear error, never a model (and so never a NaN model).
func TestFitRefusesBadInput(t *testing.T) {
	good := [][]float64{{1, 2}, {2, 1}, {3, 5}, {0, 1}}
	goodT := oneHot([]int{0, 1, 0, 1}, 2)
	nan := [][]float64{{1, 2}, {math.NaN(), 1}, {3, 5}, {0, 1}}
	constant := [][]float64{{1, 2}, {1, 2}, {1, 2}, {1, 2}}
	nanT := oneHot([]int{0, 1, 0, 1}, 2)
	nanT[2] = []float64{math.NaN(), 1}
	cases := []struct {
		name    string
		X       features.Matrix
		T       [][]float64
		w       []float64
		wantErr string
	}{
		{"empty training set", &features.Dense{NCols: 2}, nil, nil, "empty training set"},
		{"single class", dense(good), [][]float64{{1}, {1}, {1}, {1}}, nil, "at least two classes"},
		{"all rows in one class", dense(good), oneHot([]int{0, 0, 0, 0}, 2), nil, "class 1 has no examples"},
		{"class without examples", dense(good), oneHot([]int{0, 1, 0, 1}, 3), nil, "class 2 has no examples"},
		{"NaN in X", dense(nan), goodT, nil, "X[1, 0] is NaN"},
		{"Inf in X", dense([][]float64{{1, 2}, {2, 1}, {math.Inf(1), 5}, {0, 1}}), goodT, nil, "X[2, 0] is +Inf"},
		{"NaN in targets", dense(good), nanT, nil, "target of row 2, class 0 is NaN"},
		{"targets not summing to 1", dense(good), [][]float64{{1, 1}, {0, 1}, {1, 0}, {0, 1}}, nil, "sum to 2"},
		{"negative weight", dense(good), goodT, []float64{1, -1, 1, 1}, "weight of row 1"},
		{"all weights zero", dense(good), goodT, []float64{0, 0, 0, 0}, "weight 0"},
		{"every feature zero-variance", dense(constant), goodT, nil, "zero variance"},
		{"no columns", &features.Dense{NRows: 4}, goodT, nil, "no columns"},
	}
	for _, l := range []Learner{Bayes{}, Logistic{Lambda: 1}, Logistic{}, Forest{Trees: 3}} {
		for _, c := range cases {
			m, err := l.Fit(c.X, c.T, c.w)
			if err == nil || m != nil {
				t.Errorf("%T %s: got model %v, err %v", l, c.name, m, err)
				continue
			}
			if !strings.Contains(err.Error(), c.wantErr) {
				t.Errorf("%T %s: error %q does not say %q", l, c.name, err, c.wantErr)
			}
		}
	}
	if _, err := (Bayes{}).Fit(&features.Dense{NCols: 2}, nil, nil); !errors.Is(err, ErrEmpty) {
		t.Errorf("empty: %v is not ErrEmpty", err)
	}
	if _, err := (Bayes{}).Fit(dense([][]float64{{1, -2}, {2, 1}, {3, 5}, {0, 1}}), goodT, nil); err == nil || !strings.Contains(err.Error(), "non-negative") {
		t.Errorf("negative counts for naive Bayes: %v", err)
	}
	if _, err := (Bayes{Alpha: -1}).Fit(dense(good), goodT, nil); err == nil {
		t.Error("negative alpha: want an error")
	}
	if _, err := (Logistic{Lambda: -1}).Fit(dense(good), goodT, nil); err == nil {
		t.Error("negative lambda: want an error")
	}
}

func TestFitPanicsOnLengthMismatch(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("3 targets for 4 rows: want a panic")
		}
	}()
	Logistic{}.Fit(dense([][]float64{{1}, {2}, {3}, {4}}), oneHot([]int{0, 1, 0}, 2), nil)
}

// One zero-variance column among varying ones is allowed: every learner
// must give a finite model.
func TestZeroVarianceColumnGivesFiniteModel(t *testing.T) {
	Xr := [][]float64{{3, 1, 0}, {3, 0, 1}, {3, 2, 0}, {3, 0, 2}, {3, 1, 1}, {3, 0, 0}}
	T := oneHot([]int{0, 1, 0, 1, 0, 1}, 2)
	for _, l := range []Learner{Bayes{}, Logistic{Lambda: 0.1}, Logistic{Lambda: 0, MaxIter: 200}, Forest{Trees: 5}} {
		m, err := l.Fit(dense(Xr), T, nil)
		if err != nil {
			if _, ok := l.(Logistic); ok && strings.Contains(err.Error(), "diverged") {
				continue // λ = 0 on separable rows: refused, not NaN
			}
			t.Fatalf("%T: %v", l, err)
		}
		finiteModel(t, m.PredictProba(dense(Xr)))
	}
}

func TestCalibrateRefusesBadInput(t *testing.T) {
	X := dense([][]float64{{1, 0}, {0, 1}, {1, 1}, {2, 0}})
	T := oneHot([]int{0, 1, 1, 0}, 2)
	m, err := Bayes{}.Fit(X, T, nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := Calibrate(m, &features.Dense{NCols: 2}, nil, nil); !errors.Is(err, ErrEmpty) {
		t.Errorf("no validation rows: %v", err)
	}
	bad := oneHot([]int{0, 1, 1, 0}, 2)
	bad[1][0] = math.NaN()
	if _, _, err := Calibrate(m, X, bad, nil); err == nil || !strings.Contains(err.Error(), "NaN") {
		t.Errorf("NaN target: %v", err)
	}
	if _, _, err := Calibrate(m, X, T, []float64{0, 0, 0, 0}); err == nil {
		t.Error("all-zero weights: want an error")
	}
	c, cal, err := Calibrate(m, X, T, nil)
	if err != nil || math.IsNaN(cal.Temperature) || cal.Temperature <= 0 {
		t.Fatalf("calibration %+v, %v", cal, err)
	}
	finiteModel(t, c.PredictProba(X))
}
