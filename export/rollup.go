package export

import (
	"errors"
	"fmt"
	"sort"
	"strings"

	"gonum.org/v1/gonum/stat/distuv"

	"handoff/verdict"
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

// Interval is an estimate with a confidence interval.
type Interval struct {
	Value float64 `json:"value"`
	Lo    float64 `json:"lo"`
	Hi    float64 `json:"hi"`
}

// RollupConfig configures Rollup.
type RollupConfig struct {
	Reps  int     // unused: the intervals are exact (kept for callers)
	Level float64 // interval level; 0 means 0.95
	Seed  uint64
}

// Rollup rolls the final classes of the rows up to their parents. For parent
// g with n_g answered items, the share of class c is (1/n_g) Σ_i [class_i =
// c]; for an ordinal codebook the position is (1/n_g) Σ_i (index of class_i
// + 1). A share is a binomial proportion and gets the exact two-sided
// Clopper–Pearson interval at Level (so 0 of 3 is [0, 0.708], never a point).
// The position, a mean bounded in [1, K], gets the Clopper–Pearson interval
// of the fractional count s = Σ_i (position_i − 1)/(K − 1) out of n_g
// (Beta quantiles with s, n_g − s + 1 and s + 1, n_g − s), mapped back to
// [1, K]: exact for K = 2, conservative for bounded outcomes otherwise (a
// common practice for bounded means, no source). Items are treated as a
// sample of the parent's items. Items without a final class or without a
// parent are left out; parents are returned sorted by name.
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
		return nil, ErrNoParents
	}
	names := make([]string, 0, len(groups))
	for n := range groups {
		names = append(names, n)
	}
	sort.Strings(names)
	K := len(classes)
	out := make([]ParentShares, 0, len(names))
	for _, name := range names {
		g := groups[name]
		ps := ParentShares{Parent: name, Items: g.items, Answered: len(g.cls), Shares: make([]Interval, K)}
		n := len(g.cls)
		if n == 0 {
			out = append(out, ps)
			continue
		}
		counts := make([]int, K)
		frac := 0.0 // Σ (position − 1) / (K − 1)
		for _, k := range g.cls {
			counts[k]++
			if K > 1 {
				frac += float64(k) / float64(K-1)
			}
		}
		for k := range K {
			l, h := verdict.ClopperPearson(counts[k], n, cfg.Level)
			ps.Shares[k] = Interval{Value: float64(counts[k]) / float64(n), Lo: l, Hi: h}
		}
		if ordinal {
			l, h := fractionalCP(frac, n, cfg.Level)
			w := float64(K - 1)
			ps.Position = &Interval{Value: 1 + w*frac/float64(n), Lo: 1 + w*l, Hi: 1 + w*h}
		}
		out = append(out, ps)
	}
	return out, nil
}

// RollupText is a roll-up as `loop rollup` prints it: a line per parent
// with its answered and all items, each class's share with its interval
// and, for an ordinal codebook, the mean position.
func RollupText(ps []ParentShares, classes []string, ordinal bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%-16s %6s", "parent", "items")
	for _, k := range classes {
		fmt.Fprintf(&b, "  %-22s", k)
	}
	if ordinal {
		fmt.Fprintf(&b, "  %-22s", "mean position")
	}
	b.WriteString("\n")
	for _, p := range ps {
		fmt.Fprintf(&b, "%-16s %3d/%-3d", p.Parent, p.Answered, p.Items)
		for _, sh := range p.Shares {
			fmt.Fprintf(&b, "  %.2f [%.2f, %.2f]      ", sh.Value, sh.Lo, sh.Hi)
		}
		if p.Position != nil {
			fmt.Fprintf(&b, "  %.2f [%.2f, %.2f]", p.Position.Value, p.Position.Lo, p.Position.Hi)
		}
		b.WriteString("\n")
	}
	return b.String()
}

// ErrNoParents is returned by Rollup when no item has a parent.
var ErrNoParents = errors.New("no item has a parent; import items with a parent field (or --split sentences) to roll up")

// fractionalCP is the Clopper–Pearson interval for a real-valued count s
// of n (0 ≤ s ≤ n) at level.
func fractionalCP(s float64, n int, level float64) (lo, hi float64) {
	a := 1 - level
	N := float64(n)
	lo, hi = 0, 1
	if s > 0 {
		lo = distuv.Beta{Alpha: s, Beta: N - s + 1}.Quantile(a / 2)
	}
	if s < N {
		hi = distuv.Beta{Alpha: s + 1, Beta: N - s}.Quantile(1 - a/2)
	}
	return lo, hi
}
