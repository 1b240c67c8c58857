package verdict

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/optimize"
)

// CurvePoint is one round on a learning curve: the labels spent so far
// (every crowd label in the project at that round) and the error of that
// round's model on the evaluation set.
type CurvePoint struct {
	Labels int     `json:"labels"`
	Error  float64 `json:"error"`
}

// Series is a named learning curve (e.g. "random" next to "entropy").
type Series struct {
	Name   string       `json:"name"`
	Points []CurvePoint `json:"points"`
}

// The bounds of the learning-curve fit: the exponent b lies in [MinExponent,
// MaxExponent]; the floor c in [0, the last point's error].
const (
	MinExponent = 0.05
	MaxExponent = 2
)

// PowerLaw is a fitted inverse power law err(n) = A·n^(−B) + C and the
// estimate it gives for a target error.
type PowerLaw struct {
	A   float64 `json:"a"`
	B   float64 `json:"b"`
	C   float64 `json:"c"` // the error floor as n → ∞
	SSE float64 `json:"sse"`
	R2  float64 `json:"r2"` // 1 − SSE / Σ(e − ē)²
	// Fitted says the fit is good enough to show (R² ≥ the minimum); an
	// estimate of 0 more labels (the target already reached) may come
	// without one.
	Fitted bool `json:"fitted"`
	// Points is the number of points fitted, Spent the labels of the last.
	Points int `json:"points"`
	Spent  int `json:"spent"`
	// Target is the error the estimate aims for.
	Target float64 `json:"target"`
	// Reachable is true: a PowerLaw is returned only with an estimate.
	Reachable bool `json:"reachable"`
	// LabelsAt is the smallest n with err(n) ≤ Target (Spent when the last
	// point already meets it), More = LabelsAt − Spent.
	LabelsAt int `json:"labels_at"`
	More     int `json:"more"`
	// MoreLo and MoreHi are the bootstrap interval of More over the
	// points; MoreHi is −1 when its upper end lies beyond 3× the labels
	// spent (no figure is given there).
	MoreLo int     `json:"more_lo"`
	MoreHi int     `json:"more_hi"`
	Level  float64 `json:"level"`
}

// Eval returns A·n^(−B) + C.
func (p PowerLaw) Eval(n float64) float64 { return p.A*math.Pow(n, -p.B) + p.C }

// CurveOptions configures FitCurve. Zero values are defaults.
type CurveOptions struct {
	Target float64 // target error; required, in (0, 1)
	Cap    int     // most labels an estimate may name (archive × labels per item); 0 means none
	Level  float64 // level of the bootstrap interval; 0 means 0.95
	B      int     // bootstrap resamples of the points; 0 means 200
	Seed   uint64
	// MinPoints is the fewest points (rounds with new labels) that give an
	// estimate; 0 means 4. MinR2 is the least R² of a usable fit; 0
	// means 0.7.
	MinPoints int
	MinR2     float64
}

// ErrNoEstimate is wrapped by FitCurve's errors when the points give no
// estimate; the message says why.
var ErrNoEstimate = errors.New("no estimate yet")

// FitCurve fits err(n) = a·n^(−b) + c to the points by least squares
// (unweighted, on the error scale) under the constraints a ≥ 0, b in
// [MinExponent, MaxExponent] and 0 ≤ c ≤ e_last (the floor cannot lie above
// the error reached), and estimates the labels needed to reach the target:
//
//	n* = (a / (target − c))^(1/b).
//
// Fitting: for each b on a log-spaced grid of 200 values (60 for the
// bootstrap's refits) the model is linear
// in (a, c), solved in closed form and clamped to the constraints; the best
// three are refined by Nelder–Mead (gonum optimize) over a bounded
// reparametrisation, and the least sum of squares wins.
//
// When the last point (the most labels) already meets the target, the
// estimate is 0 more labels. Otherwise it returns an error wrapping
// ErrNoEstimate, saying why, when: fewer than MinPoints points with
// distinct label counts; the errors do not vary; the fit explains less than
// MinR2 of their variance; the floor c is at or above the target; n* lies
// beyond 3× the labels spent (no extrapolation further than that); or n*
// exceeds Cap. The interval of More is the
// percentile bootstrap over the points (resampled with replacement, refitted
// on the grid alone, n* taken as +∞ when a resample's floor is at or above
// the target).
// Points with labels ≤ 0 or errors outside [0, 1] are an error.
func FitCurve(pts []CurvePoint, o CurveOptions) (PowerLaw, error) {
	if !(o.Target > 0 && o.Target < 1) {
		return PowerLaw{}, fmt.Errorf("target error: %v is not in (0, 1)", o.Target)
	}
	if o.Level == 0 {
		o.Level = 0.95
	}
	if o.B <= 0 {
		o.B = 200
	}
	if o.MinPoints <= 0 {
		o.MinPoints = 4
	}
	if o.MinR2 == 0 {
		o.MinR2 = 0.7
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
	if len(distinct) < o.MinPoints {
		return PowerLaw{}, fmt.Errorf("%w: %d rounds with new labels, an estimate needs %d", ErrNoEstimate, len(distinct), o.MinPoints)
	}
	last := pts[len(pts)-1]
	for _, p := range pts {
		if p.Labels > last.Labels {
			last = p
		}
	}
	f := fitPower(pts, last.Error, true)
	f.Points, f.Spent, f.Target, f.Level = len(pts), last.Labels, o.Target, o.Level
	f.Fitted = f.sst > 0 && f.R2 >= o.MinR2
	if f.sst == 0 && last.Error > o.Target {
		return PowerLaw{}, fmt.Errorf("%w: the error has not changed between rounds (%.3f throughout)", ErrNoEstimate, last.Error)
	}
	if last.Error <= o.Target {
		// Reached: no extrapolation needed, whatever the fit.
		f.Reachable, f.LabelsAt, f.More, f.MoreLo, f.MoreHi = true, last.Labels, 0, 0, 0
		return f.PowerLaw, nil
	}
	if f.R2 < o.MinR2 {
		return PowerLaw{}, fmt.Errorf("%w: the power law fits the %d points poorly (R² %.2f < %.2f)", ErrNoEstimate, len(pts), f.R2, o.MinR2)
	}
	nstar := f.at(o.Target)
	limit := 3 * float64(last.Labels)
	switch {
	case math.IsInf(nstar, 1):
		return PowerLaw{}, fmt.Errorf("%w: the fitted curve levels off at error %.3f, not below the target %.3g", ErrNoEstimate, f.C, o.Target)
	case nstar > limit:
		return PowerLaw{}, fmt.Errorf("%w: the fitted curve reaches the target %.3g only beyond 3× the %d labels spent, too far to extrapolate", ErrNoEstimate, o.Target, last.Labels)
	case o.Cap > 0 && nstar > float64(o.Cap):
		return PowerLaw{}, fmt.Errorf("%w: the fitted curve reaches the target %.3g only beyond %d labels, more than the archive's items times the labels per item", ErrNoEstimate, o.Target, o.Cap)
	}
	f.Reachable = true
	f.LabelsAt = int(math.Ceil(nstar))
	f.More = max(0, f.LabelsAt-last.Labels)
	// Bootstrap over the points (refits on the grid of b only).
	rng := rand.New(rand.NewPCG(o.Seed, 0xc0de))
	var more []float64
	res := make([]CurvePoint, len(pts))
	for range o.B {
		seen := map[int]bool{}
		for i := range res {
			res[i] = pts[rng.IntN(len(pts))]
			seen[res[i].Labels] = true
		}
		if len(seen) < 3 {
			continue
		}
		g := fitPower(res, last.Error, false)
		m := g.at(o.Target) - float64(last.Labels)
		more = append(more, math.Max(0, m))
	}
	f.MoreLo, f.MoreHi = f.More, f.More
	if len(more) > 0 {
		slices.Sort(more)
		lo, hi := quantile7(more, (1-o.Level)/2), quantile7(more, (1+o.Level)/2)
		f.MoreLo = int(math.Floor(math.Min(lo, float64(f.More))))
		f.MoreHi = int(math.Ceil(math.Max(hi, float64(f.More))))
		if math.IsInf(hi, 1) || hi+float64(last.Labels) > limit {
			f.MoreHi = -1
		}
	}
	return f.PowerLaw, nil
}

type fitted struct {
	PowerLaw
	sst float64
}

// at returns n* for the target, +Inf when the floor is at or above it.
func (f fitted) at(target float64) float64 {
	switch {
	case f.C >= target:
		return math.Inf(1)
	case f.A == 0:
		return 1
	}
	n := math.Pow(f.A/(target-f.C), 1/f.B)
	if math.IsNaN(n) {
		return math.Inf(1)
	}
	return n
}

// fitPower fits a·n^(−b) + c with a ≥ 0, b in [MinExponent, MaxExponent],
// 0 ≤ c ≤ cmax: on the grid of b alone (the bootstrap's refits), or refined
// by Nelder–Mead.
func fitPower(pts []CurvePoint, cmax float64, refine bool) fitted {
	ns := make([]float64, len(pts))
	es := make([]float64, len(pts))
	mean := 0.0
	for i, p := range pts {
		ns[i], es[i] = float64(p.Labels), p.Error
		mean += p.Error
	}
	mean /= float64(len(pts))
	sst := 0.0
	for _, e := range es {
		sst += (e - mean) * (e - mean)
	}
	sse := func(a, b, c float64) float64 {
		s := 0.0
		for i := range ns {
			r := a*math.Pow(ns[i], -b) + c - es[i]
			s += r * r
		}
		return s
	}
	// For fixed b: least squares of e = a·x + c, x = n^−b, with a ≥ 0 and
	// 0 ≤ c ≤ cmax.
	solve := func(b float64) (float64, float64) {
		var sx, sy, sxx, sxy float64
		m := float64(len(ns))
		xs := make([]float64, len(ns))
		for i := range ns {
			x := math.Pow(ns[i], -b)
			xs[i] = x
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
		fix := func(c float64) float64 { // best a ≥ 0 for a fixed c
			num := 0.0
			for i := range xs {
				num += xs[i] * (es[i] - c)
			}
			if sxx == 0 {
				return 0
			}
			return math.Max(0, num/sxx)
		}
		if c < 0 {
			c = 0
			a = fix(c)
		} else if c > cmax {
			c = cmax
			a = fix(c)
		}
		if a < 0 {
			a, c = 0, math.Min(cmax, math.Max(0, sy/m))
		}
		return a, c
	}
	type start struct{ a, b, c, sse float64 }
	var starts []start
	grid := 200
	if !refine {
		grid = 60
	}
	for i := 0; i < grid; i++ {
		b := MinExponent * math.Pow(MaxExponent/MinExponent, float64(i)/float64(grid-1))
		a, c := solve(b)
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
	// Bounded reparametrisation: a = e^x0, b = lo + (hi−lo)·σ(x1),
	// c = cmax·σ(x2).
	sig := func(x float64) float64 { return 1 / (1 + math.Exp(-x)) }
	logit := func(p float64) float64 {
		p = math.Min(1-1e-9, math.Max(1e-9, p))
		return math.Log(p / (1 - p))
	}
	unpack := func(x []float64) (float64, float64, float64) {
		return math.Exp(x[0]), MinExponent + (MaxExponent-MinExponent)*sig(x[1]), cmax * sig(x[2])
	}
	prob := optimize.Problem{Func: func(x []float64) float64 {
		a, b, c := unpack(x)
		return sse(a, b, c)
	}}
	nstarts := 3
	if !refine {
		nstarts = 0
	}
	for _, s := range starts[:nstarts] {
		x0 := []float64{math.Log(math.Max(s.a, 1e-12)), logit((s.b - MinExponent) / (MaxExponent - MinExponent)), 0}
		if cmax > 0 {
			x0[2] = logit(s.c / cmax)
		}
		res, err := optimize.Minimize(prob, x0, &optimize.Settings{FuncEvaluations: 3000}, &optimize.NelderMead{})
		if err != nil && res == nil {
			continue
		}
		a, b, c := unpack(res.X)
		if cmax == 0 {
			c = 0
		}
		if v := sse(a, b, c); !math.IsNaN(v) && !math.IsInf(a, 0) && v < best.sse {
			best = start{a, b, c, v}
		}
	}
	f := fitted{PowerLaw: PowerLaw{A: best.a, B: best.b, C: best.c, SSE: best.sse}, sst: sst}
	if sst > 0 {
		f.R2 = 1 - best.sse/sst
	}
	return f
}
