package round

import (
	"fmt"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/stat"
)

// ParentShares is one parent's roll-up: how many of its items have a final
// class, the class shares with bootstrap intervals and, for an ordinal
// codebook, the mean position.
type ParentShares struct {
	Parent   string     `json:"parent"`
	Items    int        `json:"items"`    // items of the parent
	Answered int        `json:"answered"` // items with a final class
	Shares   []Interval `json:"shares"`   // per class, in codebook order
	// Position is the mean class position (1 = the lowest class) for an
	// ordinal codebook; nil otherwise.
	Position *Interval `json:"position,omitempty"`
}

// Interval is an estimate with a percentile bootstrap interval.
type Interval struct {
	Value float64 `json:"value"`
	Lo    float64 `json:"lo"`
	Hi    float64 `json:"hi"`
}

// RollupConfig configures Rollup.
type RollupConfig struct {
	Reps  int     // bootstrap replicates; 0 means 1000
	Level float64 // interval level; 0 means 0.95
	Seed  uint64
}

// Rollup rolls the final classes of the rows up to their parents. For parent
// g with n_g answered items, the share of class c is (1/n_g) Σ_i [class_i =
// c]; for an ordinal codebook the position is (1/n_g) Σ_i (index of class_i
// + 1). Intervals are percentile bootstrap intervals over Reps replicates
// that resample the parent's items with replacement (items are resampled
// within their parent, parents are not mixed). Items without a final class or
// without a parent are left out; parents are returned sorted by name.
func Rollup(rows []Row, classes []string, ordinal bool, cfg RollupConfig) ([]ParentShares, error) {
	if cfg.Reps <= 0 {
		cfg.Reps = 1000
	}
	if cfg.Level <= 0 || cfg.Level >= 1 {
		cfg.Level = 0.95
	}
	idx := map[string]int{}
	for k, c := range classes {
		idx[c] = k
	}
	type group struct {
		items int
		cls   []int
	}
	groups := map[string]*group{}
	for _, r := range rows {
		if r.Parent == "" {
			continue
		}
		g := groups[r.Parent]
		if g == nil {
			g = &group{}
			groups[r.Parent] = g
		}
		g.items++
		if r.Class == "" {
			continue
		}
		k, ok := idx[r.Class]
		if !ok {
			return nil, fmt.Errorf("item %q has class %q, which is not in the codebook", r.Item, r.Class)
		}
		g.cls = append(g.cls, k)
	}
	if len(groups) == 0 {
		return nil, fmt.Errorf("%w: no item has a parent; import items with a parent field (or --split sentences) to roll up", ErrNothing)
	}
	names := make([]string, 0, len(groups))
	for n := range groups {
		names = append(names, n)
	}
	sort.Strings(names)
	K := len(classes)
	lo, hi := (1-cfg.Level)/2, 1-(1-cfg.Level)/2
	out := make([]ParentShares, 0, len(names))
	for gi, name := range names {
		g := groups[name]
		ps := ParentShares{Parent: name, Items: g.items, Answered: len(g.cls), Shares: make([]Interval, K)}
		n := len(g.cls)
		if n == 0 {
			out = append(out, ps)
			continue
		}
		share := func(cls []int) ([]float64, float64) {
			s := make([]float64, K)
			pos := 0.0
			for _, k := range cls {
				s[k]++
				pos += float64(k + 1)
			}
			for k := range s {
				s[k] /= float64(len(cls))
			}
			return s, pos / float64(len(cls))
		}
		s0, p0 := share(g.cls)
		rng := rand.New(rand.NewPCG(cfg.Seed, uint64(gi)))
		boots := make([][]float64, K)
		for k := range boots {
			boots[k] = make([]float64, cfg.Reps)
		}
		pos := make([]float64, cfg.Reps)
		res := make([]int, n)
		for b := range cfg.Reps {
			for i := range res {
				res[i] = g.cls[rng.IntN(n)]
			}
			s, p := share(res)
			for k := range s {
				boots[k][b] = s[k]
			}
			pos[b] = p
		}
		q := func(x []float64, p float64) float64 {
			sort.Float64s(x)
			return stat.Quantile(p, stat.Empirical, x, nil)
		}
		for k := range K {
			ps.Shares[k] = Interval{Value: s0[k], Lo: q(boots[k], lo), Hi: q(boots[k], hi)}
		}
		if ordinal {
			ps.Position = &Interval{Value: p0, Lo: q(pos, lo), Hi: q(pos, hi)}
		}
		out = append(out, ps)
	}
	return out, nil
}
