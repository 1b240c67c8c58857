package selector

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
)

// Reason says why an item is in the next batch.
type Reason string

// The reasons, in the order Select fills them.
const (
	ReasonAudit    Reason = "audit"          // random machine-labelled item, to measure error after handoff
	ReasonHeldOut  Reason = "held-out"       // random unlabelled member of the held-out set: its first labels
	ReasonStandard Reason = "reference"      // labelled held-out item below the reference standard: more labels
	ReasonConflict Reason = "model-vs-crowd" // confident consensus that the model disputes: expert review
	ReasonSplit    Reason = "crowd-split"    // consensus posterior still low: more labels
	ReasonUnsure   Reason = "model-unsure"   // the model is unsure: a label teaches it most
)

// Reasons lists every reason in the order Select fills them.
var Reasons = []Reason{ReasonAudit, ReasonHeldOut, ReasonStandard, ReasonConflict, ReasonSplit, ReasonUnsure}

// State says what an item is to the selector.
type State uint8

// The item states.
const (
	// Unlabelled items have no crowd labels and are not in the held-out
	// set: candidates for model-unsure.
	Unlabelled State = iota
	// Labelled items have crowd labels and a consensus and are used for
	// training: candidates for crowd-split and model-vs-crowd conflict.
	Labelled
	// HeldOut items are reserved for the verdict and are never picked, for
	// any reason: they must stay a random sample untouched by selection.
	HeldOut
	// Machine items carry a machine label after handoff: candidates for
	// audit only.
	Machine
	// Excluded items are never picked (already queued, dropped, …).
	Excluded
	// HeldOutWaiting items are members of the held-out set without labels
	// yet: candidates for held-out top-up only, drawn at random, so that
	// the labelled part of the held-out set stays a random sample of it.
	HeldOutWaiting
	// HeldOutBelow items are labelled members of the held-out set whose
	// consensus does not yet meet the reference standard: candidates for
	// reference-standard requests only.
	HeldOutBelow
)

// Pool is what Select chooses from. Item i is described by entry i of every
// slice; slices other than State may be nil when no plan line needs them.
type Pool struct {
	// State of every item; its length is the number of items.
	State []State
	// Proba is the model's probability vector per item. Required for
	// Unlabelled items when Plan.Unsure > 0 (strategies other than
	// Committee), and for Labelled items when Plan.Conflict > 0 (out-of-fold
	// probabilities are best there). Other rows may be nil.
	Proba [][]float64
	// Committee[m][i] is committee member m's probability vector for item
	// i (e.g. bootstrap models), for the Committee strategy. Rows of items
	// that are not Unlabelled may be nil.
	Committee [][][]float64
	// Consensus is the consensus posterior per item (nil for items
	// without one). Required for Labelled items when Plan.Split or
	// Plan.Conflict > 0.
	Consensus [][]float64
	// Labels is the number of crowd labels per item, for Plan.MaxLabels
	// (nil means unknown: no cap is applied).
	Labels []int
	// Features holds one feature row per item, for density weighting and
	// diversity (nil when neither is used).
	Features features.Matrix
	// Uncertainty, when not nil, is the model-unsure score per item used in
	// place of the entropy strategy's (e.g. TreeUncertainty over a question
	// tree); Proba still gives the predicted class for balancing. Other
	// strategies ignore it.
	Uncertainty []float64
}

// Plan says how many items to pick for each reason and how.
//
// Zero values are defaults: Strategy "" is Entropy, Beta 0 turns density
// weighting off, Diversity "" turns diversity off, Candidates 0 is 10,
// SplitBelow 0 is 0.8, ConflictAbove 0 is 0.9, MaxLabels 0 is no cap.
type Plan struct {
	Unsure, Split, Conflict, HeldOut, Standard, Audit int // items wanted per reason

	Strategy Strategy // uncertainty score for model-unsure picks
	// Beta is the density exponent: model-unsure scores are multiplied by
	// Density^Beta, the mean cosine similarity to the unlabelled candidates
	// (information density, Settles & Craven 2008).
	Beta float64
	// Diversity spreads the model-unsure picks by greedy k-centre over
	// the feature rows of the top Candidates×Unsure candidates.
	Diversity  Metric
	Candidates int
	// Balanced spreads the model-unsure picks over the model's predicted
	// classes: classes take turns, best candidate first, so each class
	// gets ⌊n/K⌋ or ⌈n/K⌉ picks unless it runs out of candidates.
	Balanced bool
	// SplitBelow: a Labelled item whose largest consensus posterior is
	// below it is crowd-split; the lowest posteriors go first.
	SplitBelow float64
	// MaxLabels: items with this many crowd labels are not asked again.
	MaxLabels int
	// ConflictAbove: a Labelled item whose largest consensus posterior is
	// at least this and whose model prediction is another class is a
	// model-vs-crowd conflict; ranked by 1 − model probability of the
	// consensus class.
	ConflictAbove float64
	// NoRefill keeps shortfalls empty. By default slots a reason cannot
	// fill (too few candidates) go to model-unsure, when the pool has model
	// scores.
	NoRefill bool
	// Seed fixes tie-breaking and the random picks.
	Seed uint64
}

// PlanShares returns a plan of n items split over reasons by shares
// (non-negative, normalised to sum 1) with the largest-remainder method;
// equal remainders go to the reason listed first in Reasons. Other plan
// fields are left at their zero values.
func PlanShares(n int, shares map[Reason]float64) (Plan, error) {
	var p Plan
	if n < 0 {
		return p, fmt.Errorf("batch size: %d is negative", n)
	}
	tot := 0.0
	for r, s := range shares {
		if !slices.Contains(Reasons, r) {
			return p, fmt.Errorf("shares: unknown reason %q", r)
		}
		if math.IsNaN(s) || s < 0 || math.IsInf(s, 0) {
			return p, fmt.Errorf("shares: %s has share %v (want a finite number ≥ 0)", r, s)
		}
		tot += s
	}
	if tot == 0 {
		return p, fmt.Errorf("shares: all shares are zero")
	}
	counts := make([]int, len(Reasons))
	rem := make([]float64, len(Reasons))
	left := n
	for k, r := range Reasons {
		x := float64(n) * shares[r] / tot
		counts[k] = int(math.Floor(x))
		rem[k] = x - float64(counts[k])
		left -= counts[k]
	}
	for ; left > 0; left-- {
		best := 0
		for k := range rem {
			if rem[k] > rem[best] {
				best = k
			}
		}
		counts[best]++
		rem[best] = -1
	}
	p.Audit, p.HeldOut, p.Standard, p.Conflict, p.Split, p.Unsure = counts[0], counts[1], counts[2], counts[3], counts[4], counts[5]
	return p, nil
}

// Pick is one item of the next batch: its index in the pool, why it was
// picked, and its score for that reason (higher is picked first; 0 for the
// random picks, audit and held-out).
type Pick struct {
	Item   int     `json:"item"`
	Reason Reason  `json:"reason"`
	Score  float64 `json:"score"`
}

// Select picks the next batch from pool according to plan. Reasons are
// filled in the order of Reasons: audit (random Machine items) and held-out
// top-up (random HeldOutWaiting items) first, as plain random samples (so
// the labelled part of the held-out set stays a random sample of it), then
// reference-standard requests (HeldOutBelow items, the machine's most
// confident first when Proba has their rows, otherwise in random order),
// conflicts, crowd-split items and finally model-unsure items. No item is
// picked twice, HeldOut and Excluded items are never picked, and the result
// depends only on the inputs and plan.Seed. Picks are returned grouped by
// reason in that order, best first within a reason.
//
// Slices of the wrong length panic; invalid probabilities or features and
// impossible plans return an error saying which item or field is wrong.
func Select(pool Pool, plan Plan) ([]Pick, error) {
	n := len(pool.State)
	check := func(name string, l int, present bool) {
		if present && l != n {
			panic(fmt.Sprintf("selector: Pool.%s has %d entries, Pool.State has %d", name, l, n))
		}
	}
	check("Proba", len(pool.Proba), pool.Proba != nil)
	check("Consensus", len(pool.Consensus), pool.Consensus != nil)
	check("Labels", len(pool.Labels), pool.Labels != nil)
	check("Uncertainty", len(pool.Uncertainty), pool.Uncertainty != nil)
	for m, c := range pool.Committee {
		check(fmt.Sprintf("Committee[%d]", m), len(c), true)
	}
	if pool.Features != nil && pool.Features.Rows() != n {
		panic(fmt.Sprintf("selector: Pool.Features has %d rows, Pool.State has %d", pool.Features.Rows(), n))
	}
	for _, q := range []struct {
		name string
		v    int
	}{{"Unsure", plan.Unsure}, {"Split", plan.Split}, {"Conflict", plan.Conflict}, {"HeldOut", plan.HeldOut}, {"Standard", plan.Standard}, {"Audit", plan.Audit}, {"Candidates", plan.Candidates}, {"MaxLabels", plan.MaxLabels}} {
		if q.v < 0 {
			return nil, fmt.Errorf("plan.%s: %d is negative", q.name, q.v)
		}
	}
	if math.IsNaN(plan.Beta) || plan.Beta < 0 || math.IsInf(plan.Beta, 0) {
		return nil, fmt.Errorf("plan.Beta: %v (want a finite number ≥ 0)", plan.Beta)
	}
	splitBelow, conflictAbove := orDefault(plan.SplitBelow, 0.8), orDefault(plan.ConflictAbove, 0.9)
	for _, t := range []struct {
		name string
		v    float64
	}{{"SplitBelow", splitBelow}, {"ConflictAbove", conflictAbove}} {
		if math.IsNaN(t.v) || t.v < 0 || t.v > 1 {
			return nil, fmt.Errorf("plan.%s: %v is not in [0, 1]", t.name, t.v)
		}
	}
	strategy, err := ParseStrategy(string(plan.Strategy))
	if err != nil {
		return nil, fmt.Errorf("plan.%w", err)
	}
	if plan.Diversity != NoDiversity && plan.Diversity != Cosine && plan.Diversity != Euclidean {
		return nil, fmt.Errorf("plan.Diversity: unknown metric %q (want cosine or euclidean)", plan.Diversity)
	}
	if (plan.Diversity != NoDiversity || plan.Beta > 0) && plan.Unsure > 0 && pool.Features == nil {
		return nil, fmt.Errorf("pool.Features: density weighting and diversity need feature rows")
	}

	rng := rand.New(rand.NewPCG(plan.Seed, 0x5e1ec7))
	// tie[i] breaks equal scores in a seeded random order.
	tie := rng.Perm(n)
	taken := make([]bool, n)
	var out []Pick
	short := 0
	add := func(r Reason, items []int, score []float64, want int) {
		k := 0
		for _, i := range items {
			if k == want {
				break
			}
			if taken[i] {
				continue
			}
			taken[i] = true
			out = append(out, Pick{Item: i, Reason: r, Score: score[i]})
			k++
		}
		short += want - k
	}
	zero := make([]float64, n)
	random := func(s State) []int {
		var c []int
		for i, st := range pool.State {
			if st == s {
				c = append(c, i)
			}
		}
		rng.Shuffle(len(c), func(a, b int) { c[a], c[b] = c[b], c[a] })
		return c
	}
	ranked := func(c []int, score []float64) []int {
		slices.SortStableFunc(c, func(a, b int) int {
			if score[a] != score[b] {
				if score[a] > score[b] {
					return -1
				}
				return 1
			}
			return tie[a] - tie[b]
		})
		return c
	}

	// Audit and held-out top-up: random.
	add(ReasonAudit, random(Machine), zero, plan.Audit)
	add(ReasonHeldOut, random(HeldOutWaiting), zero, plan.HeldOut)
	if plan.Standard > 0 {
		below := random(HeldOutBelow)
		score := zero
		if pool.Proba != nil {
			score = make([]float64, n)
			for _, i := range below {
				if p := pool.Proba[i]; p != nil {
					if err := checkProba(p); err != nil {
						return nil, fmt.Errorf("item %d: model probabilities: %w", i, err)
					}
					score[i] = p[floats.MaxIdx(p)]
				}
			}
			below = ranked(below, score)
		}
		add(ReasonStandard, below, score, plan.Standard)
	}

	// Conflicts and crowd-split items among the labelled.
	if plan.Conflict > 0 || plan.Split > 0 {
		if pool.Consensus == nil {
			return nil, fmt.Errorf("pool.Consensus: crowd-split and conflict picks need consensus posteriors")
		}
		if plan.Conflict > 0 && pool.Proba == nil {
			return nil, fmt.Errorf("pool.Proba: conflict picks need model probabilities for labelled items")
		}
		conf := make([]float64, n)
		split := make([]float64, n)
		var cc, sc []int
		for i, st := range pool.State {
			if st != Labelled || pool.Consensus[i] == nil {
				continue
			}
			post := pool.Consensus[i]
			if err := checkProba(post); err != nil {
				return nil, fmt.Errorf("item %d: consensus posterior: %w", i, err)
			}
			c := floats.MaxIdx(post)
			top := post[c]
			if plan.Conflict > 0 && top >= conflictAbove {
				p := pool.Proba[i]
				if p == nil {
					return nil, fmt.Errorf("item %d: labelled item without model probabilities", i)
				}
				if len(p) != len(post) {
					panic(fmt.Sprintf("selector: item %d has %d model probabilities and %d consensus ones", i, len(p), len(post)))
				}
				if err := checkProba(p); err != nil {
					return nil, fmt.Errorf("item %d: model probabilities: %w", i, err)
				}
				if floats.MaxIdx(p) != c {
					conf[i] = 1 - p[c]
					cc = append(cc, i)
				}
			}
			capped := plan.MaxLabels > 0 && pool.Labels != nil && pool.Labels[i] >= plan.MaxLabels
			if top < splitBelow && !capped {
				split[i] = 1 - top
				sc = append(sc, i)
			}
		}
		add(ReasonConflict, ranked(cc, conf), conf, plan.Conflict)
		add(ReasonSplit, ranked(sc, split), split, plan.Split)
	}

	want := plan.Unsure
	// Refill only when model-unsure picks are possible at all: a plan
	// without them may come with a pool without model scores.
	if !plan.NoRefill && (plan.Unsure > 0 || pool.Proba != nil || len(pool.Committee) > 0) {
		want += short
	}
	if want > 0 {
		picks, err := unsure(pool, plan, strategy, taken, want, ranked)
		if err != nil {
			return nil, err
		}
		out = append(out, picks...)
	}
	return out, nil
}

func orDefault(v, d float64) float64 {
	if v == 0 {
		return d
	}
	return v
}

// unsure picks up to want model-unsure items among the untaken Unlabelled.
func unsure(pool Pool, plan Plan, st Strategy, taken []bool, want int, ranked func([]int, []float64) []int) ([]Pick, error) {
	n := len(pool.State)
	var cand []int
	for i, s := range pool.State {
		if s == Unlabelled && !taken[i] {
			cand = append(cand, i)
		}
	}
	if len(cand) == 0 {
		return nil, nil
	}
	score := make([]float64, n)
	pred := make([]int, n)
	if st == Committee {
		if len(pool.Committee) == 0 {
			return nil, fmt.Errorf("pool.Committee: the committee strategy needs members' probabilities")
		}
		sub := make([][][]float64, len(pool.Committee))
		for m := range sub {
			sub[m] = make([][]float64, len(cand))
			for k, i := range cand {
				if pool.Committee[m][i] == nil {
					return nil, fmt.Errorf("item %d: committee member %d has no probabilities", i, m)
				}
				sub[m][k] = pool.Committee[m][i]
			}
		}
		ve, err := VoteEntropy(sub)
		if err != nil {
			return nil, err
		}
		for k, i := range cand {
			score[i] = ve[k]
			// Predicted class for balancing: the committee's mean vote.
			avg := make([]float64, len(sub[0][k]))
			for m := range sub {
				for j, v := range sub[m][k] {
					avg[j] += v
				}
			}
			pred[i] = floats.MaxIdx(avg)
		}
	} else {
		if pool.Proba == nil {
			return nil, fmt.Errorf("pool.Proba: model-unsure picks need model probabilities")
		}
		rows := make([][]float64, len(cand))
		for k, i := range cand {
			if pool.Proba[i] == nil {
				return nil, fmt.Errorf("item %d: unlabelled item without model probabilities", i)
			}
			rows[k] = pool.Proba[i]
		}
		s, err := Scores(st, rows)
		if err != nil {
			return nil, err
		}
		if pool.Uncertainty != nil && st == Entropy {
			for k, i := range cand {
				s[k] = pool.Uncertainty[i]
			}
		}
		for k, i := range cand {
			score[i] = s[k]
			pred[i] = floats.MaxIdx(pool.Proba[i])
		}
	}
	if plan.Beta > 0 {
		d, err := Density(pool.Features, cand, cand)
		if err != nil {
			return nil, err
		}
		for k, i := range cand {
			score[i] *= math.Pow(d[k], plan.Beta)
		}
	}
	cand = ranked(cand, score)
	if plan.Diversity != NoDiversity {
		m := plan.Candidates
		if m == 0 {
			m = 10
		}
		if top := m * want; top < len(cand) {
			cand = cand[:top]
		}
	}
	// Groups: one per predicted class when balanced, else one.
	var groups [][]int
	if plan.Balanced {
		at := map[int]int{}
		for _, i := range cand {
			g, ok := at[pred[i]]
			if !ok {
				g = len(groups)
				at[pred[i]] = g
				groups = append(groups, nil)
			}
			groups[g] = append(groups[g], i)
		}
	} else {
		groups = [][]int{cand}
	}
	if plan.Diversity != NoDiversity {
		for g, c := range groups {
			order, err := KCenter(pool.Features, c, want, plan.Diversity, nil)
			if err != nil {
				return nil, err
			}
			re := make([]int, len(order))
			for k, o := range order {
				re[k] = c[o]
			}
			groups[g] = re
		}
	}
	var out []Pick
	pos := make([]int, len(groups))
	for len(out) < want {
		moved := false
		for g := range groups {
			if len(out) == want {
				break
			}
			if pos[g] < len(groups[g]) {
				i := groups[g][pos[g]]
				pos[g]++
				taken[i] = true
				out = append(out, Pick{Item: i, Reason: ReasonUnsure, Score: score[i]})
				moved = true
			}
		}
		if !moved {
			break
		}
	}
	return out, nil
}
