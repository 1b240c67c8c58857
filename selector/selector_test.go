package selector

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
)

func TestScoresRankHandMadeCase(t *testing.T) {
	// A two-way tie at the top versus a flat three-way spread: entropy and
	// least-confidence prefer the flat one, margin the tie (Settles 2009,
	// §3.1 makes this very point about the three measures).
	tie := []float64{0.5, 0.5, 0}
	flat := []float64{0.4, 0.3, 0.3}
	sure := []float64{0.9, 0.05, 0.05}
	proba := [][]float64{sure, tie, flat}
	cases := []struct {
		st   Strategy
		want []int // items best first
	}{
		{Entropy, []int{2, 1, 0}},
		{"", []int{2, 1, 0}},
		{LeastConfidence, []int{2, 1, 0}},
		{Margin, []int{1, 2, 0}},
	}
	for _, c := range cases {
		s, err := Scores(c.st, proba)
		if err != nil {
			t.Fatal(err)
		}
		picks, err := Select(Pool{State: make([]State, 3), Proba: proba}, Plan{Unsure: 3, Strategy: c.st})
		if err != nil {
			t.Fatal(err)
		}
		var got []int
		for _, p := range picks {
			got = append(got, p.Item)
			if p.Reason != ReasonUnsure || p.Score != s[p.Item] {
				t.Errorf("%s: pick %+v, want reason %s score %v", c.st, p, ReasonUnsure, s[p.Item])
			}
		}
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("%s: order %v, want %v (scores %v)", c.st, got, c.want, s)
		}
	}
	if h := EntropyScore([]float64{1. / 3, 1. / 3, 1. / 3}); math.Abs(h-math.Log(3)) > 1e-12 {
		t.Errorf("entropy of uniform = %v, want ln 3", h)
	}
	if m := MarginScore(tie); m != 1 {
		t.Errorf("margin of a tie = %v, want 1", m)
	}
}

func TestVoteEntropy(t *testing.T) {
	a := []float64{0.8, 0.2}
	b := []float64{0.3, 0.7}
	// item 0: all four members vote class 0; item 1: two and two.
	committee := [][][]float64{{a, a}, {a, b}, {a, a}, {a, b}}
	ve, err := VoteEntropy(committee)
	if err != nil {
		t.Fatal(err)
	}
	if ve[0] != 0 || math.Abs(ve[1]-math.Log(2)) > 1e-12 {
		t.Errorf("vote entropy %v, want [0 ln2]", ve)
	}
	picks, err := Select(Pool{State: make([]State, 2), Committee: committee}, Plan{Unsure: 1, Strategy: Committee})
	if err != nil {
		t.Fatal(err)
	}
	if len(picks) != 1 || picks[0].Item != 1 {
		t.Errorf("committee picked %+v, want item 1", picks)
	}
	if _, err := VoteEntropy([][][]float64{{{0.5, math.NaN()}}}); err == nil {
		t.Error("NaN probability accepted")
	}
}

func dense(rows ...[]float64) *features.Dense {
	d := &features.Dense{NRows: len(rows), NCols: len(rows[0])}
	for _, r := range rows {
		d.Data = append(d.Data, r...)
	}
	return d
}

func TestDensityWeighting(t *testing.T) {
	// Three items in one direction and an outlier at right angles; the
	// outlier is the most uncertain, but density weighting puts a dense
	// item first.
	x := dense([]float64{1, 0.1}, []float64{1, 0}, []float64{1, -0.1}, []float64{0, 1})
	d, err := Density(x, []int{0, 1, 2, 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 3; i++ {
		if d[i] <= d[3] {
			t.Errorf("density %v: item %d not denser than the outlier", d, i)
		}
	}
	proba := [][]float64{{0.7, 0.3}, {0.65, 0.35}, {0.7, 0.3}, {0.5, 0.5}}
	pool := Pool{State: make([]State, 4), Proba: proba, Features: x}
	p0, _ := Select(pool, Plan{Unsure: 1})
	p1, err := Select(pool, Plan{Unsure: 1, Beta: 1})
	if err != nil {
		t.Fatal(err)
	}
	if p0[0].Item != 3 || p1[0].Item != 1 {
		t.Errorf("plain pick %d (want 3), density-weighted pick %d (want 1)", p0[0].Item, p1[0].Item)
	}
}

func TestKCenterDiversity(t *testing.T) {
	// Sparse rows: a tight cluster of near copies (best scores) and two
	// distinct items. k-centre takes the best, then the distinct ones.
	x := &features.CSR{NRows: 5, NCols: 4,
		Indptr:  []int{0, 2, 4, 6, 7, 8},
		Indices: []int32{0, 1, 0, 1, 0, 1, 2, 3},
		Data:    []float64{1, 0.1, 1, 0.12, 1, 0.09, 1, 1}}
	for _, m := range []Metric{Cosine, Euclidean} {
		got, err := KCenter(x, []int{0, 1, 2, 3, 4}, 3, m, nil)
		if err != nil {
			t.Fatal(err)
		}
		if got[0] != 0 || !(got[1] == 3 || got[1] == 4) || !(got[2] == 3 || got[2] == 4) {
			t.Errorf("%s: k-centre picked %v, want 0 then 3 and 4", m, got)
		}
	}
	proba := [][]float64{{0.5, 0.5}, {0.51, 0.49}, {0.52, 0.48}, {0.8, 0.2}, {0.85, 0.15}}
	pool := Pool{State: make([]State, 5), Proba: proba, Features: x}
	plain, _ := Select(pool, Plan{Unsure: 2})
	div, err := Select(pool, Plan{Unsure: 2, Diversity: Cosine})
	if err != nil {
		t.Fatal(err)
	}
	if plain[1].Item != 1 || div[0].Item != 0 || div[1].Item != 3 {
		t.Errorf("plain %v, diverse %v; want second pick 1 without and 3 with diversity", plain, div)
	}
}

func TestBalancedQuotas(t *testing.T) {
	// Class 0 predictions are all more uncertain than class 1 and 2 ones;
	// balanced picks still spread 6 picks 2/2/2.
	var proba [][]float64
	for i := 0; i < 10; i++ {
		e := 0.01 * float64(i)
		proba = append(proba, []float64{0.4 + e, 0.3 - e/2, 0.3 - e/2}) // class 0, unsure
	}
	for c := 1; c < 3; c++ {
		for i := 0; i < 10; i++ {
			p := []float64{0.05, 0.05, 0.05}
			p[c] = 0.9
			p[0] = 0.05 - 0.002*float64(i)
			p[3-c] = 1 - p[c] - p[0]
			proba = append(proba, p)
		}
	}
	pool := Pool{State: make([]State, len(proba)), Proba: proba}
	count := func(picks []Pick) [3]int {
		var k [3]int
		for _, p := range picks {
			k[floats.MaxIdx(proba[p.Item])]++
		}
		return k
	}
	plain, _ := Select(pool, Plan{Unsure: 6})
	bal, err := Select(pool, Plan{Unsure: 6, Balanced: true})
	if err != nil {
		t.Fatal(err)
	}
	if k := count(plain); k != [3]int{6, 0, 0} {
		t.Errorf("plain class counts %v, want [6 0 0]", k)
	}
	if k := count(bal); k != [3]int{2, 2, 2} {
		t.Errorf("balanced class counts %v, want [2 2 2]", k)
	}
	// 7 picks: one class gets the extra one.
	x := &features.Dense{NRows: len(proba), NCols: 3}
	for _, p := range proba {
		x.Data = append(x.Data, p...)
	}
	pool.Features = x
	bal7, err := Select(pool, Plan{Unsure: 7, Balanced: true, Diversity: Euclidean, Candidates: 3})
	if err != nil {
		t.Fatal(err)
	}
	if k := count(bal7); k[0]+k[1]+k[2] != 7 || k[0] < 2 || k[1] < 2 || k[2] < 2 || k[0] > 3 || k[1] > 3 || k[2] > 3 {
		t.Errorf("balanced diverse class counts %v, want 2 or 3 each, 7 in all", k)
	}
}

// mixedPool builds a pool of every state with seeded random probabilities.
func mixedPool(seed uint64, n int) Pool {
	r := rand.New(rand.NewPCG(seed, 1))
	p := Pool{State: make([]State, n), Proba: make([][]float64, n), Consensus: make([][]float64, n), Labels: make([]int, n)}
	for i := range p.State {
		p.State[i] = State(r.IntN(7))
		a := r.Float64()
		p.Proba[i] = []float64{a, 1 - a}
		if p.State[i] == Labelled {
			b := 0.5 + r.Float64()/2
			if r.IntN(2) == 0 {
				p.Consensus[i] = []float64{b, 1 - b}
			} else {
				p.Consensus[i] = []float64{1 - b, b}
			}
			p.Labels[i] = 1 + r.IntN(5)
		}
	}
	return p
}

func TestSelectMixRespectsQuotas(t *testing.T) {
	pool := mixedPool(7, 2000)
	plan := Plan{Unsure: 50, Split: 20, Conflict: 10, HeldOut: 15, Standard: 12, Audit: 5, Seed: 3, MaxLabels: 5}
	picks, err := Select(pool, plan)
	if err != nil {
		t.Fatal(err)
	}
	got := map[Reason]int{}
	seen := map[int]bool{}
	for _, p := range picks {
		got[p.Reason]++
		if seen[p.Item] {
			t.Fatalf("item %d picked twice", p.Item)
		}
		seen[p.Item] = true
		st := pool.State[p.Item]
		ok := map[Reason]State{ReasonAudit: Machine, ReasonHeldOut: HeldOutWaiting, ReasonStandard: HeldOutBelow, ReasonUnsure: Unlabelled, ReasonSplit: Labelled, ReasonConflict: Labelled}[p.Reason]
		if st != ok {
			t.Errorf("%s pick of item %d in state %d", p.Reason, p.Item, st)
		}
		c := pool.Consensus[p.Item]
		switch p.Reason {
		case ReasonSplit:
			if c[floats.MaxIdx(c)] >= 0.8 || pool.Labels[p.Item] >= 5 {
				t.Errorf("crowd-split pick %d has posterior %v and %d labels", p.Item, c, pool.Labels[p.Item])
			}
		case ReasonStandard:
			// The machine's most confident below-standard items go first.
			conf := pool.Proba[p.Item][floats.MaxIdx(pool.Proba[p.Item])]
			for i, st := range pool.State {
				if st == HeldOutBelow && !seen[i] && pool.Proba[i][floats.MaxIdx(pool.Proba[i])] > conf {
					t.Errorf("reference pick %d (confidence %.3f) before item %d (%.3f)", p.Item, conf, i, pool.Proba[i][floats.MaxIdx(pool.Proba[i])])
					break
				}
			}
		case ReasonConflict:
			if c[floats.MaxIdx(c)] < 0.9 || floats.MaxIdx(c) == floats.MaxIdx(pool.Proba[p.Item]) {
				t.Errorf("conflict pick %d: consensus %v, model %v", p.Item, c, pool.Proba[p.Item])
			}
		}
	}
	want := map[Reason]int{ReasonUnsure: 50, ReasonSplit: 20, ReasonConflict: 10, ReasonHeldOut: 15, ReasonStandard: 12, ReasonAudit: 5}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("reason counts %v, want %v", got, want)
	}

	// Determinism: the same seed gives the same batch, another seed changes
	// the random picks.
	again, _ := Select(pool, plan)
	if !reflect.DeepEqual(picks, again) {
		t.Error("same seed, different batch")
	}
	plan.Seed = 4
	other, _ := Select(pool, plan)
	if reflect.DeepEqual(picks, other) {
		t.Error("different seed, same batch")
	}

	// Shortfall: only 3 machine items; the rest of the audit quota goes to
	// model-unsure unless NoRefill.
	small := Pool{State: []State{Machine, Machine, Machine, Unlabelled, Unlabelled, Unlabelled, HeldOut},
		Proba: [][]float64{nil, nil, nil, {0.5, 0.5}, {0.6, 0.4}, {0.9, 0.1}, {0.5, 0.5}}}
	p1, _ := Select(small, Plan{Audit: 5, Unsure: 1})
	p2, _ := Select(small, Plan{Audit: 5, Unsure: 1, NoRefill: true})
	if len(p1) != 6 || len(p2) != 4 {
		t.Errorf("refill gave %d picks (want 6: all but held-out), no refill %d (want 4)", len(p1), len(p2))
	}
	for _, p := range p1 {
		if p.Item == 6 {
			t.Error("held-out item picked")
		}
	}
	// An audit-only plan on a pool without model scores: no refill, no error.
	small.Proba = nil
	p3, err := Select(small, Plan{Audit: 5})
	if err != nil || len(p3) != 3 {
		t.Errorf("audit-only plan: %d picks, error %v (want 3, nil)", len(p3), err)
	}
}

func TestPlanShares(t *testing.T) {
	p, err := PlanShares(200, map[Reason]float64{ReasonUnsure: 0.7, ReasonSplit: 0.15, ReasonHeldOut: 0.1, ReasonAudit: 0.05})
	if err != nil {
		t.Fatal(err)
	}
	if p.Unsure != 140 || p.Split != 30 || p.HeldOut != 20 || p.Audit != 10 || p.Conflict != 0 {
		t.Errorf("plan %+v", p)
	}
	p, _ = PlanShares(10, map[Reason]float64{ReasonUnsure: 1, ReasonSplit: 1, ReasonHeldOut: 1})
	if p.Unsure+p.Split+p.HeldOut != 10 {
		t.Errorf("shares do not add up: %+v", p)
	}
	if _, err := PlanShares(10, map[Reason]float64{ReasonUnsure: math.NaN()}); err == nil {
		t.Error("NaN share accepted")
	}
}

func TestBadInput(t *testing.T) {
	_, err := Select(Pool{State: []State{Unlabelled}, Proba: [][]float64{{0.5, 0.6}}}, Plan{Unsure: 1})
	if err == nil {
		t.Error("probabilities summing to 1.1 accepted")
	}
	_, err = Select(Pool{State: []State{Unlabelled}, Proba: [][]float64{{0.5, 0.5}}}, Plan{Unsure: 1, Strategy: "bogus"})
	if err == nil {
		t.Error("unknown strategy accepted")
	}
	_, err = Select(Pool{State: []State{Unlabelled}, Proba: [][]float64{{0.5, 0.5}}}, Plan{Unsure: 1, Beta: 1})
	if err == nil {
		t.Error("density without features accepted")
	}
	defer func() {
		if recover() == nil {
			t.Error("length mismatch did not panic")
		}
	}()
	Select(Pool{State: []State{Unlabelled}, Proba: [][]float64{{0.5, 0.5}, {0.5, 0.5}}}, Plan{Unsure: 1})
}
