package verdict

import (
	"fmt"
	"math"
	"slices"
)

// RiskPoint is one candidate confidence threshold on the coverage–risk
// curve.
type RiskPoint struct {
	Threshold float64 `json:"threshold"`
	N         int     `json:"n"`        // held-out items with confidence ≥ Threshold
	Errors    int     `json:"errors"`   // of those, items where machine and consensus disagree
	Coverage  float64 `json:"coverage"` // N / held-out size
	Risk      float64 `json:"risk"`     // Errors / N
	Upper     float64 `json:"upper"`    // one-sided Clopper–Pearson upper bound on the risk
	Archive   float64 `json:"archive"`  // share of the unlabelled archive with confidence ≥ Threshold
	Tested    bool    `json:"tested"`   // reached by the fixed-sequence test
	Passed    bool    `json:"passed"`   // tested and Upper ≤ max-error
}

// Threshold is the outcome of the fixed-sequence test.
type Threshold struct {
	Found     bool    `json:"found"`
	Threshold float64 `json:"threshold"` // lowest threshold that passed (if Found)
	N         int     `json:"n"`
	Errors    int     `json:"errors"`
	Coverage  float64 `json:"coverage"` // share of the held-out set covered
	Risk      float64 `json:"risk"`
	Upper     float64 `json:"upper"`   // the bound that holds at Level
	Archive   float64 `json:"archive"` // expected share of the archive autolabelled
	MaxError  float64 `json:"max_error"`
	Level     float64 `json:"level"`
	MinCount  int     `json:"min_count"`
	// Unsettled is how many of the N covered items do not yet meet the
	// reference standard and were counted as disagreements.
	Unsettled int `json:"unsettled"`
	// Stop explains where the walk ended.
	Stop string `json:"stop"`
}

// MinCountFor returns the default minimum number of held-out items a
// threshold must cover to be tested: the larger of 100 and n₁, the smallest
// n at which one disagreement in n items would still pass (one-sided
// Clopper–Pearson bound at level ≤ maxErr): 93 for 5% at 95%, 473 for 1%;
// 198 for 5% at look 10 (level 1 − 0.05/110). Common practice, no source:
// the walk stops at the first failing threshold, so starting it where a
// single unlucky disagreement among the most confident items would already
// fail it ends it early for nothing.
func MinCountFor(maxErr, level float64) int {
	lo, hi := 2, 2
	for UpperBound(1, hi, level) > maxErr {
		lo, hi = hi, 2*hi
		if hi > 1<<30 {
			return hi
		}
	}
	for lo < hi {
		m := (lo + hi) / 2
		if UpperBound(1, m, level) <= maxErr {
			hi = m
		} else {
			lo = m + 1
		}
	}
	return max(100, hi)
}

// CoverageRisk builds the coverage–risk curve of held-out confidences conf
// (the machine's probability of its own class) and outcomes wrong (machine
// and consensus disagree), and chooses the autolabel threshold by
// fixed-sequence testing (Bates et al. 2021; Angelopoulos et al. 2021,
// "Learn then Test"):
//
// The candidate thresholds are the distinct held-out confidences, highest
// first; threshold t covers the items with conf ≥ t. Thresholds covering
// fewer than minCount items are not tested (minCount ≤ 0 means
// MinCountFor(maxErr, level)). Walking down from the most confident tested
// threshold, each is tested against H₀: risk(t) > maxErr with the one-sided
// Clopper–Pearson upper bound at level; the walk stops at the first
// threshold whose bound exceeds maxErr, and the last one that passed is
// chosen. Because the order is fixed before any outcome is seen, the chosen
// threshold's risk is at most maxErr with probability ≥ level without another
// split of the data.
//
// archive holds the confidences of the unlabelled items; Archive fields are
// the share of them at or above each threshold (0 when archive is empty).
// Length mismatch panics; confidences that are not in [0, 1] and bad
// settings return an error.
func CoverageRisk(conf []float64, wrong []bool, archive []float64, maxErr, level float64, minCount int) ([]RiskPoint, Threshold, error) {
	if len(conf) != len(wrong) {
		panic(fmt.Sprintf("verdict: %d confidences and %d outcomes", len(conf), len(wrong)))
	}
	th := Threshold{MaxError: maxErr, Level: level}
	if !(maxErr > 0 && maxErr < 1) {
		return nil, th, fmt.Errorf("max-error: %v is not in (0, 1)", maxErr)
	}
	if !(level > 0 && level < 1) {
		return nil, th, fmt.Errorf("confidence level: %v is not in (0, 1)", level)
	}
	if minCount <= 0 {
		minCount = MinCountFor(maxErr, level)
	}
	th.MinCount = minCount
	if len(conf) == 0 {
		return nil, th, fmt.Errorf("held-out set: no items for the coverage–risk curve")
	}
	for i, c := range conf {
		if math.IsNaN(c) || c < 0 || c > 1 {
			return nil, th, fmt.Errorf("held-out item %d: confidence %v is not in [0, 1]", i, c)
		}
	}
	arch := slices.Clone(archive)
	for i, c := range arch {
		if math.IsNaN(c) || c < 0 || c > 1 {
			return nil, th, fmt.Errorf("archive item %d: confidence %v is not in [0, 1]", i, c)
		}
	}
	slices.Sort(arch)
	archShare := func(t float64) float64 {
		if len(arch) == 0 {
			return 0
		}
		k, _ := slices.BinarySearch(arch, t) // first index with arch[k] ≥ t
		return float64(len(arch)-k) / float64(len(arch))
	}
	order := make([]int, len(conf))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		switch {
		case conf[a] > conf[b]:
			return -1
		case conf[a] < conf[b]:
			return 1
		}
		return 0
	})
	var pts []RiskPoint
	n, errs := 0, 0
	for p := 0; p < len(order); {
		t := conf[order[p]]
		for p < len(order) && conf[order[p]] == t {
			n++
			if wrong[order[p]] {
				errs++
			}
			p++
		}
		pts = append(pts, RiskPoint{Threshold: t, N: n, Errors: errs,
			Coverage: float64(n) / float64(len(conf)), Risk: float64(errs) / float64(n),
			Upper: UpperBound(errs, n, level), Archive: archShare(t)})
	}
	walking := true
	th.Stop = fmt.Sprintf("no threshold covers the %d held-out items needed for a test (the held-out set has %d)", minCount, len(conf))
	for i := range pts {
		if !walking || pts[i].N < minCount {
			continue
		}
		pts[i].Tested = true
		if pts[i].Upper > maxErr {
			walking = false
			th.Stop = fmt.Sprintf("stopped at threshold %.6g: %d errors in %d items, upper bound %.4f > max-error %.4g",
				pts[i].Threshold, pts[i].Errors, pts[i].N, pts[i].Upper, maxErr)
			break
		}
		pts[i].Passed = true
		p := pts[i]
		th.Found, th.Threshold, th.N, th.Errors = true, p.Threshold, p.N, p.Errors
		th.Coverage, th.Risk, th.Upper, th.Archive = p.Coverage, p.Risk, p.Upper, p.Archive
	}
	if walking && th.Found {
		th.Stop = "every tested threshold passed, down to the lowest held-out confidence"
	}
	return pts, th, nil
}
