package selector

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// fitLogistic fits a ridge-penalised logistic regression p(y=1|x) =
// σ(w·[1, x]) by Newton's method (penalty λ/2‖w‖², intercept included for
// simplicity). Test helper only.
func fitLogistic(x [][2]float64, y []int) [3]float64 {
	var w [3]float64
	const lambda = 1e-2
	for it := 0; it < 25; it++ {
		g := mat.NewVecDense(3, nil)
		h := mat.NewSymDense(3, nil)
		for i := range x {
			f := [3]float64{1, x[i][0], x[i][1]}
			p := 1 / (1 + math.Exp(-(w[0]*f[0] + w[1]*f[1] + w[2]*f[2])))
			for a := 0; a < 3; a++ {
				g.SetVec(a, g.AtVec(a)+(p-float64(y[i]))*f[a])
				for b := a; b < 3; b++ {
					h.SetSym(a, b, h.At(a, b)+p*(1-p)*f[a]*f[b])
				}
			}
		}
		for a := 0; a < 3; a++ {
			g.SetVec(a, g.AtVec(a)+lambda*w[a])
			h.SetSym(a, a, h.At(a, a)+lambda)
		}
		var step mat.VecDense
		if err := step.SolveVec(h, g); err != nil {
			break
		}
		for a := 0; a < 3; a++ {
			w[a] -= step.AtVec(a)
		}
	}
	return w
}

// TestEntropyBeatsRandom runs a small active-learning loop on invented
// two-Gaussian data (simulation only): uncertainty sampling should reach a
// lower test error than random picks at most matched budgets, the result
// of Lewis & Gale (1994) and Settles (2009) that issue 5 asks to show on
// real data (that check lives with round/ and bench/, which own the real
// learners).
func TestEntropyBeatsRandom(t *testing.T) {
	const seeds, pool, test, start, step, rounds = 8, 1500, 2000, 6, 4, 12
	gen := func(r *rand.Rand, n int) ([][2]float64, []int) {
		x := make([][2]float64, n)
		y := make([]int, n)
		for i := range x {
			y[i] = r.IntN(2)
			s := float64(2*y[i] - 1)
			x[i] = [2]float64{2*s + r.NormFloat64(), 0.5*s + r.NormFloat64()}
		}
		return x, y
	}
	testErr := func(w [3]float64, x [][2]float64, y []int) float64 {
		e := 0
		for i := range x {
			if (w[0]+w[1]*x[i][0]+w[2]*x[i][1] > 0) != (y[i] == 1) {
				e++
			}
		}
		return float64(e) / float64(len(x))
	}
	errs := map[string][]float64{"entropy": make([]float64, rounds), "random": make([]float64, rounds)}
	for seed := uint64(0); seed < seeds; seed++ {
		r := rand.New(rand.NewPCG(seed, 77))
		px, py := gen(r, pool)
		tx, ty := gen(r, test)
		for _, mode := range []string{"entropy", "random"} {
			state := make([]State, pool)
			var lx [][2]float64
			var ly []int
			label := func(i int) {
				state[i] = Labelled
				lx, ly = append(lx, px[i]), append(ly, py[i])
			}
			// The same random start for both: first items of each class.
			for c := 0; c < 2; c++ {
				k := 0
				for i := 0; i < pool && k < start/2; i++ {
					if py[i] == c {
						label(i)
						k++
					}
				}
			}
			for round := 0; round < rounds; round++ {
				w := fitLogistic(lx, ly)
				errs[mode][round] += testErr(w, tx, ty) / seeds
				proba := make([][]float64, pool)
				for i := range proba {
					p := 1 / (1 + math.Exp(-(w[0] + w[1]*px[i][0] + w[2]*px[i][1])))
					proba[i] = []float64{1 - p, p}
				}
				plan := Plan{Unsure: step, Seed: seed*100 + uint64(round)}
				if mode == "random" {
					// Held-out top-up picks are plain random samples of
					// the waiting held-out items: mark the pool so.
					for i := range state {
						if state[i] == Unlabelled {
							state[i] = HeldOutWaiting
						}
					}
					plan = Plan{HeldOut: step, NoRefill: true, Seed: plan.Seed}
				}
				picks, err := Select(Pool{State: state, Proba: proba}, plan)
				if err != nil {
					t.Fatal(err)
				}
				for i := range state {
					if state[i] == HeldOutWaiting {
						state[i] = Unlabelled
					}
				}
				for _, p := range picks {
					label(p.Item)
				}
			}
		}
	}
	wins := 0
	for k := 1; k < rounds; k++ { // round 0 is the shared start
		if errs["entropy"][k] <= errs["random"][k] {
			wins++
		}
	}
	t.Logf("mean test error by round\n entropy %.4f\n random  %.4f", errs["entropy"], errs["random"])
	if float64(wins) < 0.8*float64(rounds-1) {
		t.Errorf("entropy at or below random error at %d of %d budgets, want ≥ 80%%", wins, rounds-1)
	}
}
