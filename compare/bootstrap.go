package compare

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// Bootstrap configures the percentile bootstrap intervals.
type Bootstrap struct {
	// Reps is the number of resamples (0 means 2000).
	Reps int `json:"reps"`
	// Level is the interval's level (0 means 0.95).
	Level float64 `json:"level"`
	// Seed seeds the resamples: resample r draws from its own PCG stream
	// (Seed, r), so the intervals depend on the seed alone.
	Seed uint64 `json:"seed"`
}

func (b Bootstrap) withDefaults() Bootstrap {
	if b.Reps <= 0 {
		b.Reps = 2000
	}
	if !(b.Level > 0 && b.Level < 1) {
		b.Level = 0.95
	}
	return b
}

// MinDefined is the share of resamples in which a statistic must be
// defined for its interval to be given: below it, the resamples that
// leave the statistic undefined (one class throughout, zero variance)
// would bias the interval, so none is given.
const MinDefined = 0.95

// Estimate is a figure with its percentile bootstrap interval.
//
// Rules: Defined is false when the figure cannot be estimated from the
// data (too few units, one class throughout, zero variance); Value, Lo and
// Hi are then 0 and Note says why. When Defined, Lo and Hi are the
// (1 − Level)/2 and (1 + Level)/2 empirical quantiles of the figure over
// Reps resamples of the N units with replacement (percentile bootstrap);
// Reps is 0 (and Lo = Hi = Value) when no interval is given, and Note then
// says why.
type Estimate struct {
	Value   float64 `json:"value"`
	Lo      float64 `json:"lo"`
	Hi      float64 `json:"hi"`
	Level   float64 `json:"level"`
	N       int     `json:"n"`
	Reps    int     `json:"reps"`
	Defined bool    `json:"defined"`
	Note    string  `json:"note,omitempty"`
}

// String gives the estimate as "0.912 [0.880, 0.940]", or "no estimate
// yet: why".
func (e Estimate) String() string {
	if !e.Defined {
		return "no estimate yet: " + e.Note
	}
	if e.Reps == 0 {
		return fmt.Sprintf("%.3f (no interval: %s)", e.Value, e.Note)
	}
	return fmt.Sprintf("%.3f [%.3f, %.3f]", e.Value, e.Lo, e.Hi)
}

// NoEstimate returns an undefined estimate over n units saying why.
func NoEstimate(n int, why string) Estimate {
	return Estimate{N: n, Note: why}
}

// Estimated computes f on n units (f(nil): every unit once) and its
// percentile bootstrap interval: each resample draws n units with
// replacement and passes f their multiplicities as weights. An error from
// f on the data makes the estimate undefined (Note: the error's text);
// resamples on which f errs or gives NaN are left out, and when fewer than
// MinDefined of them remain no interval is given.
func Estimated(n int, b Bootstrap, f func(w []float64) (float64, error)) Estimate {
	b = b.withDefaults()
	e := Estimate{N: n, Level: b.Level}
	v, err := f(nil)
	if err != nil {
		e.Note = noteOf(err)
		return e
	}
	if math.IsNaN(v) {
		e.Note = "the figure is not a number for these data"
		return e
	}
	e.Value, e.Lo, e.Hi, e.Defined = v, v, v, true
	vals := make([]float64, 0, b.Reps)
	w := make([]float64, n)
	for r := range b.Reps {
		rng := rand.New(rand.NewPCG(b.Seed, 0xb0075+uint64(r)))
		clear(w)
		for range n {
			w[rng.IntN(n)]++
		}
		x, err := f(w)
		if err != nil || math.IsNaN(x) {
			continue
		}
		vals = append(vals, x)
	}
	if float64(len(vals)) < MinDefined*float64(b.Reps) {
		e.Note = fmt.Sprintf("the figure is undefined in %d of %d resamples (too few units or too little variety)", b.Reps-len(vals), b.Reps)
		return e
	}
	slices.Sort(vals)
	a := (1 - b.Level) / 2
	e.Lo = stat.Quantile(a, stat.Empirical, vals, nil)
	e.Hi = stat.Quantile(1-a, stat.Empirical, vals, nil)
	e.Reps = len(vals)
	return e
}

// noteOf is an error's text without the ErrUndefined prefix.
func noteOf(err error) string {
	s := err.Error()
	if errors.Is(err, ErrUndefined) {
		if p := ErrUndefined.Error() + ": "; len(s) > len(p) && s[:len(p)] == p {
			return s[len(p):]
		}
	}
	return s
}
