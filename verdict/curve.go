package verdict

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/optimize"
)

// CurvePoint is one round on a learning curve: the number of labelled items
// the model was trained on and its held-out error (1 − accuracy).
type CurvePoint struct {
	Labels int     `json:"labels"`
	Error  float64 `json:"error"`
}

// Series is a named learning curve (e.g. "random" next to "entropy").
type Series struct {
	Name   string       `json:"name"`
	Points []CurvePoint `json:"points"`
}

// PowerLaw is a fitted inverse power law err(n) = A·n^(−B) + C and what it
// says about a target error.
type PowerLaw struct {
	A   float64 `json:"a"`
	B   float64 `json:"b"`
	C   float64 `json:"c"` // the error floor as n → ∞
	SSE float64 `json:"sse"`
	// Target is the error the estimate aims for.
	Target float64 `json:"target"`
	// Reachable is false when the floor C is at or above Target.
	Reachable bool `json:"reachable"`
	// LabelsAt is the smallest n with err(n) ≤ Target (0 if not reachable).
	LabelsAt int `json:"labels_at"`
	// More is LabelsAt minus the labels of the last point, at least 0.
	More int `json:"more"`
}

// Eval returns A·n^(−B) + C.
func (p PowerLaw) Eval(n float64) float64 { return p.A*math.Pow(n, -p.B) + p.C }

// FitPowerLaw fits err(n) = a·n^(−b) + c with a ≥ 0, b > 0, c ≥ 0 to the
// points by least squares (unweighted, on the error scale) and estimates
// the labels needed to reach target:
//
//	n* = (a / (target − c))^(1/b), not reachable when c ≥ target.
//
// Fitting: for each b on a grid from 0.02 to 3 the model is linear in (a, c),
// which are solved in closed form (with c clamped to 0 and a to ≥ 0); the
// three best starts are refined by Nelder–Mead (gonum optimize) over
// (ln a, ln b, √c), and the least sum of squares wins. It needs at least
// three points with distinct label counts > 0 and errors in [0, 1]; otherwise
// it returns an error.
func FitPowerLaw(pts []CurvePoint, target float64) (PowerLaw, error) {
	if !(target > 0 && target < 1) {
		return PowerLaw{}, fmt.Errorf("target error: %v is not in (0, 1)", target)
	}
	distinct := map[int]bool{}
	for i, p := range pts {
		if p.Labels <= 0 {
			return PowerLaw{}, fmt.Errorf("learning curve point %d: %d labels (want > 0)", i, p.Labels)
		}
		if math.IsNaN(p.Error) || p.Error < 0 || p.Error > 1 {
			return PowerLaw{}, fmt.Errorf("learning curve point %d: error %v is not in [0, 1]", i, p.Error)
		}
		distinct[p.Labels] = true
	}
	if len(distinct) < 3 {
		return PowerLaw{}, fmt.Errorf("learning curve: need at least three rounds with different label counts, have %d", len(distinct))
	}
	ns := make([]float64, len(pts))
	es := make([]float64, len(pts))
	last := 0
	for i, p := range pts {
		ns[i], es[i] = float64(p.Labels), p.Error
		last = max(last, p.Labels)
	}
	sse := func(a, b, c float64) float64 {
		s := 0.0
		for i := range ns {
			r := a*math.Pow(ns[i], -b) + c - es[i]
			s += r * r
		}
		return s
	}
	type start struct{ a, b, c, sse float64 }
	var starts []start
	for b := 0.02; b <= 3; b *= 1.25 {
		// Least squares of e = a·x + c, x = n^−b.
		var sx, sy, sxx, sxy float64
		m := float64(len(ns))
		for i := range ns {
			x := math.Pow(ns[i], -b)
			sx += x
			sy += es[i]
			sxx += x * x
			sxy += x * es[i]
		}
		den := m*sxx - sx*sx
		a, c := 0.0, sy/m
		if den > 0 {
			a = (m*sxy - sx*sy) / den
			c = (sy - a*sx) / m
		}
		if c < 0 {
			c = 0
			a = sxy / sxx
		}
		if a < 0 {
			a, c = 0, math.Max(0, sy/m)
		}
		starts = append(starts, start{a, b, c, sse(a, b, c)})
	}
	slices.SortStableFunc(starts, func(x, y start) int {
		switch {
		case x.sse < y.sse:
			return -1
		case x.sse > y.sse:
			return 1
		}
		return 0
	})
	best := starts[0]
	prob := optimize.Problem{Func: func(x []float64) float64 {
		return sse(math.Exp(x[0]), math.Exp(x[1]), x[2]*x[2])
	}}
	for _, s := range starts[:3] {
		a := math.Max(s.a, 1e-9)
		res, err := optimize.Minimize(prob, []float64{math.Log(a), math.Log(s.b), math.Sqrt(s.c)},
			&optimize.Settings{FuncEvaluations: 4000}, &optimize.NelderMead{})
		if err != nil && res == nil {
			continue
		}
		x := res.X
		cand := start{math.Exp(x[0]), math.Exp(x[1]), x[2] * x[2], res.F}
		if !math.IsNaN(cand.sse) && !math.IsInf(cand.a, 0) && cand.sse < best.sse {
			best = cand
		}
	}
	p := PowerLaw{A: best.a, B: best.b, C: best.c, SSE: best.sse, Target: target}
	switch {
	case p.C >= target:
		p.Reachable = false
	case p.A == 0:
		p.Reachable, p.LabelsAt = true, 1
	default:
		nstar := math.Pow(p.A/(target-p.C), 1/p.B)
		if math.IsInf(nstar, 0) || math.IsNaN(nstar) || nstar > 1e15 {
			p.Reachable = false
		} else {
			p.Reachable, p.LabelsAt = true, max(1, int(math.Ceil(nstar)))
		}
	}
	if p.Reachable {
		p.More = max(0, p.LabelsAt-last)
	}
	return p, nil
}
