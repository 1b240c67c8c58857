package learner

import (
	"math"
	"math/rand/v2"
	"testing"

	"handoff/features"
)

func TestECEByHand(t *testing.T) {
	// Bins of width 1/15: 0.9 → bin 13 (0.8667, 0.9333], 0.6 → bin 8
	// (0.5333, 0.6], 1.0 → bin 14. Hand computation:
	// bin 13: 2 rows, conf 0.9, acc 0.5 → 2·0.4; bin 8: 1 row, conf 0.6,
	// acc 1 → 0.4; bin 14: 1 row, conf 1, acc 1 → 0. ECE = 1.2/4 = 0.3.
	probs := [][]float64{{0.9, 0.1}, {0.1, 0.9}, {0.6, 0.4}, {1, 0}}
	labels := []int{0, 0, 0, 0}
	if e := ECE(probs, labels); math.Abs(e-0.3) > 1e-12 {
		t.Errorf("ECE = %v, want 0.3", e)
	}
	if e := ECE(nil, nil); e != 0 {
		t.Errorf("ECE of no rows = %v", e)
	}
}

// constModel returns row i of p for row i of X, whatever X holds.
type constModel struct{ p [][]float64 }

func (m *constModel) Classes() int { return len(m.p[0]) }
func (m *constModel) PredictProba(X features.Matrix) [][]float64 {
	return predictRows(m, X)
}
func (m *constModel) PredictProbaInto(dst []float64, X features.Matrix) {
	k := m.Classes()
	for i := 0; i < X.Rows(); i++ {
		copy(dst[i*k:], m.p[i])
	}
}

// Data drawn from a calibrated model whose scores are then doubled (an
// over-confident model, T* = 2): temperature scaling must find T ≈ 2 and
// lower both NLL and ECE (Guo et al. 2017, §4).
func TestTemperatureRecoversOverconfidence(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	n := 20000
	rows := make([][]float64, n)
	targets := make([][]float64, n)
	for i := range rows {
		z := rng.NormFloat64() * 2
		p1 := 1 / (1 + math.Exp(-z))
		y := 0
		if rng.Float64() < p1 {
			y = 1
		}
		targets[i] = []float64{float64(1 - y), float64(y)}
		q := 1 / (1 + math.Exp(-2*z)) // doubled score
		rows[i] = []float64{1 - q, q}
	}
	base := &constModel{p: rows}
	cm, cal, err := Calibrate(base, dense(make2(n)), targets, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(cal.Temperature-2) > 0.1 {
		t.Errorf("T = %.3f, want ≈ 2", cal.Temperature)
	}
	if !(cal.NLLAfter < cal.NLLBefore) || !(cal.ECEAfter < cal.ECEBefore) {
		t.Errorf("calibration did not help: %+v", cal)
	}
	p := cm.PredictProba(dense(make2(n)))
	finiteModel(t, p)
	want := 1 / (1 + math.Exp(-math.Log(rows[0][1]/rows[0][0])/cal.Temperature))
	if math.Abs(p[0][1]-want) > 1e-12 {
		t.Errorf("calibrated P = %v, want %v", p[0][1], want)
	}
}

func make2(n int) [][]float64 {
	out := make([][]float64, n)
	for i := range out {
		out[i] = []float64{float64(i % 2), 1}
	}
	return out
}
