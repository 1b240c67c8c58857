package verdict

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestCurveEstimatesWithinFactorTwo: on simulated learning curves that
// follow a power law with noise (invented for this test), whenever FitCurve
// gives an estimate, the labels it says are needed are within a factor of 2
// of the true ones in at least 90% of cases; and it gives none when the
// truth lies beyond 3× the labels spent.
func TestCurveEstimatesWithinFactorTwo(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 5))
	given, within, far, farGiven := 0, 0, 0, 0
	for k := 0; k < 200; k++ {
		a := 0.5 + 2*r.Float64()
		b := 0.2 + 0.6*r.Float64()
		c := 0.02 * r.Float64()
		var pts []CurvePoint
		n := 200.0 + 300*r.Float64()
		for range 6 {
			e := a*math.Pow(n, -b) + c + 0.004*r.NormFloat64()
			pts = append(pts, CurvePoint{Labels: int(n), Error: math.Min(1, math.Max(0, e))})
			n *= 1.35
		}
		last := float64(pts[len(pts)-1].Labels)
		// A target the true curve reaches at 1.1–5× the labels spent.
		want := last * (1.1 + 3.9*r.Float64())
		target := a*math.Pow(want, -b) + c
		if target <= 0 || target >= pts[len(pts)-1].Error {
			continue
		}
		f, err := FitCurve(pts, CurveOptions{Target: target, Seed: uint64(k)})
		if want > 3*last {
			far++
		}
		if err != nil {
			continue
		}
		if want > 3*last {
			farGiven++
		}
		given++
		ratio := float64(f.LabelsAt) / want
		if ratio >= 0.5 && ratio <= 2 {
			within++
		}
	}
	t.Logf("%d estimates given, %d within a factor of 2 of the truth; %d curves reach the target beyond 3× the labels spent, %d of them got an estimate", given, within, far, farGiven)
	if given < 40 {
		t.Fatalf("only %d estimates in 200 curves: the test does not exercise the estimate", given)
	}
	if float64(within) < 0.9*float64(given) {
		t.Errorf("%d of %d estimates within a factor of 2 of the labels actually needed, want ≥ 90%%", within, given)
	}
}
