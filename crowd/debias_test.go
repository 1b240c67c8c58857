package crowd

import (
	"math"
	"math/rand/v2"
	"testing"
)

// exactMix returns a truth function giving, within each block of n items,
// the classes in exact proportion to mix (shuffled by the seed), so a
// stratum's true shares are known exactly.
func exactMix(n int, mixes [][]float64, seed uint64) (func(i int, _ *rand.Rand) int, []int) {
	var truth []int
	for s, mix := range mixes {
		var block []int
		for c, p := range mix {
			for range int(math.Round(p * float64(n))) {
				block = append(block, c)
			}
		}
		for len(block) < n {
			block = append(block, 0)
		}
		rng := rand.New(rand.NewPCG(seed, uint64(s)))
		rng.Shuffle(len(block), func(i, j int) { block[i], block[j] = block[j], block[i] })
		truth = append(truth, block[:n]...)
	}
	return func(i int, _ *rand.Rand) int { return truth[i] }, truth
}

// A shared bias: in the low stratum (0) everyone sees 40% of class A as class
// B. Truth is the same mix in every stratum. Debiasing against the reference
// stratum (2) must bring every stratum's shares within 3 points of truth.
func TestDebiasReferenceStratum(t *testing.T) {
	const per = 3000
	mix := []float64{0.5, 0.3, 0.2}
	truthFn, _ := exactMix(per, [][]float64{mix, mix, mix}, 1)
	stratum := func(i int) int { return i / per }
	c := simulate(simConfig{items: 3 * per, annotators: 40, perItem: 5, classes: 3, seed: 2, truth: truthFn,
		acc: func(a int) float64 { return 0.7 + 0.2*float64(a%5)/4 },
		perceive: func(i, t int, rng *rand.Rand) int {
			switch {
			case stratum(i) == 0 && t == 0 && rng.Float64() < 0.4:
				return 1
			case stratum(i) == 1 && t == 0 && rng.Float64() < 0.15:
				return 1
			}
			return t
		}})
	r, err := DawidSkene(c.labels, Options{})
	if err != nil {
		t.Fatal(err)
	}
	names := make([]string, 3*per)
	for i := range names {
		names[i] = []string{"a-low", "b-mid", "c-high"}[stratum(i)]
	}
	s := CategoricalStrata(names)
	d, err := Debias(r.Posterior, 3, s, DebiasOptions{Reference: 2})
	if err != nil {
		t.Fatal(err)
	}
	if d.Method != "reference" {
		t.Errorf("method %q", d.Method)
	}
	for st := 0; st < 3; st++ {
		t.Logf("stratum %s: before %.3f, after %.3f, truth %.3f", s.Names[st], d.Before[st], d.After[st], mix)
		for k := 0; k < 3; k++ {
			if math.Abs(d.After[st][k]-mix[k]) > 0.03 {
				t.Errorf("stratum %s class %d: corrected share %.3f, truth %.3f (before %.3f)", s.Names[st], k, d.After[st][k], mix[k], d.Before[st][k])
			}
		}
	}
	// The bias was there before the correction.
	if d.Before[0][0] > mix[0]-0.15 {
		t.Errorf("low stratum share of A before = %.3f; the simulated bias should have cut it to about 0.30", d.Before[0][0])
	}
	// Estimated confusion at the low stratum: about 40% of A seen as B.
	if got := d.Confusion[0][0*3+1]; math.Abs(got-0.4) > 0.05 {
		t.Errorf("estimated A→B confusion at low = %.3f, want about 0.40", got)
	}
	// Item-level: more A items recovered at the low stratum.
	correct := func(p []float64) int {
		ok := 0
		for i := 0; i < per; i++ {
			if argmax(p[i*3:(i+1)*3]) == c.truth[i] {
				ok++
			}
		}
		return ok
	}
	if correct(d.Posterior) < correct(r.Posterior) {
		t.Errorf("item accuracy at low fell from %d to %d", correct(r.Posterior), correct(d.Posterior))
	}
	checkProb(t, d.Posterior, 3)
}

// With gold and a class mix that does change with the covariate: the
// confusion per stratum is estimated against gold items and the mix by EM.
// The estimate is only as good as the gold sample (the A→B rate from n gold
// A items has a standard error of about √(0.24/n)), so this test uses about
// 2,000 gold items per stratum.
func TestDebiasGold(t *testing.T) {
	const per = 10000
	mixes := [][]float64{{0.6, 0.25, 0.15}, {0.5, 0.3, 0.2}, {0.4, 0.35, 0.25}}
	truthFn, truth := exactMix(per, mixes, 3)
	stratum := func(i int) int { return i / per }
	c := simulate(simConfig{items: 3 * per, annotators: 40, perItem: 5, classes: 3, seed: 4, truth: truthFn,
		acc: func(a int) float64 { return 0.7 + 0.2*float64(a%5)/4 },
		perceive: func(i, t int, rng *rand.Rand) int {
			if stratum(i) == 0 && t == 0 && rng.Float64() < 0.4 {
				return 1
			}
			return t
		}})
	r, err := DawidSkene(c.labels, Options{})
	if err != nil {
		t.Fatal(err)
	}
	vals := make([]float64, 3*per)
	for i := range vals {
		vals[i] = []float64{10, 20, 40}[stratum(i)]
	}
	s, err := NumericStrata(vals, []float64{15, 30})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(9, 9))
	gold := make([]int, len(truth))
	for i := range gold {
		gold[i] = -1
		if rng.Float64() < 0.2 {
			gold[i] = truth[i]
		}
	}
	d, err := Debias(r.Posterior, 3, s, DebiasOptions{Gold: gold})
	if err != nil {
		t.Fatal(err)
	}
	if d.Method != "gold" || d.Gold[0] == 0 {
		t.Errorf("method %q gold %v", d.Method, d.Gold)
	}
	for st := range mixes {
		t.Logf("stratum %s: before %.3f, after %.3f, truth %.3f", s.Names[st], d.Before[st], d.After[st], mixes[st])
		for k := 0; k < 3; k++ {
			if math.Abs(d.After[st][k]-mixes[st][k]) > 0.03 {
				t.Errorf("stratum %s class %d: corrected share %.3f, truth %.3f (before %.3f)", s.Names[st], k, d.After[st][k], mixes[st][k], d.Before[st][k])
			}
		}
	}
	checkProb(t, d.Posterior, 3)
}

func TestStrataAndDebiasErrors(t *testing.T) {
	s, err := QuantileStrata([]float64{1, 2, 3, 4, 5, 6, math.NaN(), 7, 8}, 4)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Names) != 4 || s.Of[6] != -1 || s.Of[0] != 0 || s.Of[8] != 3 {
		t.Errorf("quantile strata %+v", s)
	}
	if _, err := QuantileStrata([]float64{2, 2, 2}, 3); err == nil {
		t.Error("one value: want an error")
	}
	if _, err := NumericStrata([]float64{1}, []float64{2, 1}); err == nil {
		t.Error("decreasing cut points: want an error")
	}
	c := CategoricalStrata([]string{"b", "", "a", "b"})
	if len(c.Names) != 2 || c.Names[0] != "a" || c.Of[0] != 1 || c.Of[1] != -1 {
		t.Errorf("categorical strata %+v", c)
	}
	post := []float64{1, 0, 0.5, 0.5, 0, 1, 1, 0}
	if _, err := Debias(post, 2, c, DebiasOptions{Reference: -1}); err == nil {
		t.Error("no gold and no reference: want an error")
	}
	if _, err := Debias(post, 2, c, DebiasOptions{Reference: 5}); err == nil {
		t.Error("reference out of range: want an error")
	}
	// A stratum with no items and an item with a missing value: no NaN.
	empty := Strata{Of: []int{0, -1, 0, 0}, Names: []string{"x", "y"}}
	d, err := Debias(post, 2, empty, DebiasOptions{Reference: 0})
	if err != nil {
		t.Fatal(err)
	}
	if d.Items[1] != 0 || d.After[1][0] != 0 || d.Posterior[2] != 0.5 {
		t.Errorf("%+v", d)
	}
	checkProb(t, d.Posterior, 2)
}

func checkProb(t *testing.T, p []float64, k int) {
	t.Helper()
	for i := 0; i < len(p)/k; i++ {
		var s float64
		for _, v := range p[i*k : (i+1)*k] {
			if math.IsNaN(v) || v < 0 || v > 1 {
				t.Fatalf("item %d posterior %v", i, p[i*k:(i+1)*k])
			}
			s += v
		}
		if math.Abs(s-1) > 1e-9 {
			t.Fatalf("item %d posterior sums to %v", i, s)
		}
	}
}
