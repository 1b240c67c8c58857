// Package honest simulates projects with known truth to check that the
// verdict's autolabel bound is honest: among GO verdicts, the realised error
// of the autolabelled archive should exceed max-error in at most 1 − level of
// them (Bates et al. 2021; Angelopoulos et al. 2021). The data are invented
// by a seeded generator, for simulation only.
package honest

import (
	"math"
	"math/rand/v2"

	"handoff/verdict"
)

// Project is one simulated project: the machine's confidence and
// correctness on a held-out set and on an archive, drawn from the same
// model.
type Project struct {
	HeldConf    []float64
	HeldWrong   []bool
	ArchConf    []float64
	ArchWrong   []bool
	Gamma, A, B float64 // generator settings, for the record
}

// Generate draws a project. Confidences are c = 1/2 + Beta(A, B)/2 (a binary
// task), with A in [1, 8] and B in [0.5, 2.5] drawn per project, so models
// range from weak to strong. The chance that the machine is right at
// confidence c is c^Gamma with Gamma in [0.8, 1.4]: calibrated when Gamma = 1,
// over-confident above 1, under-confident below — imperfect either way. The
// held-out set has nHeld items, the archive nArch.
func Generate(r *rand.Rand, nHeld, nArch int) Project {
	p := Project{Gamma: 0.8 + 0.6*r.Float64(), A: 1 + 7*r.Float64(), B: 0.5 + 2*r.Float64()}
	draw := func(n int) ([]float64, []bool) {
		c := make([]float64, n)
		w := make([]bool, n)
		for i := range c {
			c[i] = 0.5 + 0.5*beta(r, p.A, p.B)
			w[i] = r.Float64() >= math.Pow(c[i], p.Gamma)
		}
		return c, w
	}
	p.HeldConf, p.HeldWrong = draw(nHeld)
	p.ArchConf, p.ArchWrong = draw(nArch)
	return p
}

// beta draws from Beta(a, b) through two gamma variates (Marsaglia & Tsang
// 2000 for shape ≥ 1, boosted for shape < 1).
func beta(r *rand.Rand, a, b float64) float64 {
	x := gamma(r, a)
	return x / (x + gamma(r, b))
}

func gamma(r *rand.Rand, a float64) float64 {
	if a < 1 {
		return gamma(r, a+1) * math.Pow(r.Float64(), 1/a)
	}
	d := a - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := r.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := r.Float64()
		if math.Log(u) < 0.5*x*x+d-d*v+d*math.Log(v) {
			return d * v
		}
	}
}

// Result counts the outcomes of a simulation.
type Result struct {
	Projects int
	Go       int // GO verdicts (a threshold passed)
	Exceed   int // GO verdicts whose autolabelled archive error exceeds max-error
	// NaiveGo and NaiveExceed are the same for the plug-in rule that takes
	// the lowest threshold whose observed held-out risk is ≤ max-error (no
	// bound), as a point of comparison.
	NaiveGo, NaiveExceed int
	MeanCoverage         float64 // mean archive coverage over GO verdicts
}

// Run simulates n projects with held-out sizes drawn in [200, 1500] and an
// archive of nArch items, at the given max-error and level, from seed.
func Run(n, nArch int, maxErr, level float64, seed uint64) (Result, error) {
	r := rand.New(rand.NewPCG(seed, 0x4e57))
	res := Result{Projects: n}
	for k := 0; k < n; k++ {
		p := Generate(r, 200+r.IntN(1301), nArch)
		pts, th, err := verdict.CoverageRisk(p.HeldConf, p.HeldWrong, p.ArchConf, maxErr, level, 0)
		if err != nil {
			return res, err
		}
		if th.Found {
			res.Go++
			res.MeanCoverage += th.Archive
			if archiveError(p, th.Threshold) > maxErr {
				res.Exceed++
			}
		}
		// Plug-in rule: lowest threshold with observed risk ≤ max-error
		// among thresholds covering at least the same minimum count.
		naive := -1.0
		for _, q := range pts {
			if q.N >= th.MinCount && q.Risk <= maxErr {
				naive = q.Threshold
			}
		}
		if naive >= 0 {
			res.NaiveGo++
			if archiveError(p, naive) > maxErr {
				res.NaiveExceed++
			}
		}
	}
	if res.Go > 0 {
		res.MeanCoverage /= float64(res.Go)
	}
	return res, nil
}

// archiveError is the realised error among archive items with confidence
// ≥ t (0 when none are covered).
func archiveError(p Project, t float64) float64 {
	n, e := 0, 0
	for i, c := range p.ArchConf {
		if c >= t {
			n++
			if p.ArchWrong[i] {
				e++
			}
		}
	}
	if n == 0 {
		return 0
	}
	return float64(e) / float64(n)
}
