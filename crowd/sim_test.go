package crowd

import (
	"math"
	"math/rand/v2"
	"testing"
)

// A tiny seeded crowd simulator for tests (invented data, simulation only).

type simConfig struct {
	items, annotators, perItem, classes int
	seed                                uint64
	// truth gives item i's true class (nil: drawn uniformly).
	truth func(i int, rng *rand.Rand) int
	// acc gives annotator a's accuracy; errors fall uniformly on the other
	// classes; a negative accuracy makes a spammer answering uniformly.
	acc func(a int) float64
	// perceive turns the true class into the class everyone sees (a shared
	// bias); nil means none.
	perceive func(i, t int, rng *rand.Rand) int
}

type simCrowd struct {
	labels *Labels
	truth  []int
	seen   []int
}

func simulate(c simConfig) simCrowd {
	rng := rand.New(rand.NewPCG(c.seed, 99))
	l := &Labels{NItems: c.items, NAnnotators: c.annotators, NClasses: c.classes}
	s := simCrowd{labels: l, truth: make([]int, c.items), seen: make([]int, c.items)}
	for i := 0; i < c.items; i++ {
		t := rng.IntN(c.classes)
		if c.truth != nil {
			t = c.truth(i, rng)
		}
		s.truth[i] = t
		seen := t
		if c.perceive != nil {
			seen = c.perceive(i, t, rng)
		}
		s.seen[i] = seen
		for _, a := range rng.Perm(c.annotators)[:c.perItem] {
			p := c.acc(a)
			var cls int
			switch {
			case p < 0:
				cls = rng.IntN(c.classes)
			case rng.Float64() < p:
				cls = seen
			default:
				cls = (seen + 1 + rng.IntN(c.classes-1)) % c.classes
			}
			l.Item = append(l.Item, int32(i))
			l.Annotator = append(l.Annotator, int32(a))
			l.Class = append(l.Class, uint8(cls))
		}
	}
	return s
}

func accuracyOf(r *Result, truth []int) float64 {
	ok := 0
	for i, t := range truth {
		if r.Class[i] == t {
			ok++
		}
	}
	return float64(ok) / float64(len(truth))
}

// Simulated crowds with known truth: Dawid–Skene is at least as accurate as
// majority vote, and with 20% spammers at 5 labels per item it beats majority
// by at least 3 points.
func TestSimulatedCrowds(t *testing.T) {
	for _, tc := range []struct {
		name     string
		spam     float64 // share of spammers
		minGain  float64
		classes  int
		accRange [2]float64
	}{
		{"fair crowd", 0, 0, 3, [2]float64{0.55, 0.9}},
		{"20% spammers, 5 labels per item", 0.2, 0.03, 4, [2]float64{0.5, 0.85}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for seed := uint64(1); seed <= 3; seed++ {
				accs := make([]float64, 50)
				rng := rand.New(rand.NewPCG(seed, 7))
				for a := range accs {
					accs[a] = tc.accRange[0] + (tc.accRange[1]-tc.accRange[0])*rng.Float64()
					if float64(a) < tc.spam*float64(len(accs)) {
						accs[a] = -1
					}
				}
				c := simulate(simConfig{items: 3000, annotators: 50, perItem: 5, classes: tc.classes, seed: seed,
					acc: func(a int) float64 { return accs[a] }})
				ds, err := DawidSkene(c.labels, Options{})
				if err != nil {
					t.Fatal(err)
				}
				mv, err := Majority(c.labels, Options{Seed: seed})
				if err != nil {
					t.Fatal(err)
				}
				oc, err := OneCoin(c.labels, Options{})
				if err != nil {
					t.Fatal(err)
				}
				aDS, aMV, aOC := accuracyOf(ds, c.truth), accuracyOf(mv, c.truth), accuracyOf(oc, c.truth)
				t.Logf("seed %d: DS %.4f, one-coin %.4f, majority %.4f (ties %d)", seed, aDS, aOC, aMV, mv.Ties)
				if aDS < aMV+tc.minGain {
					t.Errorf("seed %d: DS accuracy %.4f, majority %.4f: want DS ≥ majority + %.2f", seed, aDS, aMV, tc.minGain)
				}
				if aOC < aMV {
					t.Errorf("seed %d: one-coin %.4f below majority %.4f", seed, aOC, aMV)
				}
				checkFinite(t, ds)
				checkFinite(t, oc)
				checkFinite(t, mv)
				// Spammers get the lowest reliability.
				if tc.spam > 0 {
					var spamRel, goodRel float64
					var ns, ng int
					for a, p := range accs {
						if p < 0 {
							spamRel += ds.Reliability[a]
							ns++
						} else {
							goodRel += ds.Reliability[a]
							ng++
						}
					}
					if spamRel/float64(ns) >= goodRel/float64(ng) {
						t.Errorf("spammers' mean reliability %.3f not below the others' %.3f", spamRel/float64(ns), goodRel/float64(ng))
					}
				}
			}
		})
	}
}

// Edge cases: no NaN anywhere, plain "no labels" marks.
func TestCombineEdgeCases(t *testing.T) {
	methods := []string{MethodMajority, MethodDawidSkene, MethodOneCoin}
	t.Run("empty project", func(t *testing.T) {
		for _, m := range methods {
			r, err := Combine(m, &Labels{NClasses: 3}, Options{})
			if err != nil {
				t.Fatal(err)
			}
			if r.NItems != 0 || r.NoLabels != 0 {
				t.Errorf("%s: %+v", m, r)
			}
			checkFinite(t, r)
			for _, p := range r.Prior {
				if math.Abs(p-1.0/3) > 1e-12 {
					t.Errorf("%s: empty prior %v, want uniform", m, r.Prior)
				}
			}
		}
	})
	t.Run("items without labels, single-label annotator, class never given", func(t *testing.T) {
		// 4 classes; class 3 never occurs; annotator 3 gave one label; items
		// 5 and 6 have no labels.
		l := &Labels{NItems: 7, NAnnotators: 4, NClasses: 4,
			Item:      []int32{0, 0, 0, 1, 1, 1, 2, 2, 3, 3, 4, 4, 4},
			Annotator: []int32{0, 1, 2, 0, 1, 2, 0, 1, 0, 2, 1, 2, 3},
			Class:     []uint8{0, 0, 1, 1, 1, 1, 2, 2, 0, 2, 1, 0, 2}}
		for _, m := range methods {
			for _, alpha := range []float64{0, 0.5} {
				r, err := Combine(m, l, Options{Smoothing: alpha})
				if err != nil {
					t.Fatal(err)
				}
				checkFinite(t, r)
				if r.NoLabels != 2 || r.NLabels[5] != 0 || r.NLabels[6] != 0 || r.NLabels[4] != 3 {
					t.Errorf("%s: NoLabels %d, NLabels %v", m, r.NoLabels, r.NLabels)
				}
				for c, p := range r.Row(5) {
					if math.Abs(p-r.Prior[c]) > 1e-12 {
						t.Errorf("%s: item without labels has posterior %v, want the prior %v", m, r.Row(5), r.Prior)
					}
				}
				if alpha == 0 && m != MethodOneCoin && r.Prior[3] > 1e-9 {
					t.Errorf("%s: prior of a class never given = %v", m, r.Prior[3])
				}
				if u := Uncertain(r, 0.95); len(u) < 2 || u[len(u)-2] != 5 || u[len(u)-1] != 6 {
					t.Errorf("%s: uncertain %v should end with the unlabelled items 5, 6", m, u)
				}
			}
		}
	})
	t.Run("gold clamps", func(t *testing.T) {
		l := &Labels{NItems: 3, NAnnotators: 2, NClasses: 2,
			Item: []int32{0, 0, 1, 1, 2, 2}, Annotator: []int32{0, 1, 0, 1, 0, 1}, Class: []uint8{0, 0, 1, 1, 0, 1}}
		gold := []int{1, -1, -1}
		for _, m := range methods {
			r, err := Combine(m, l, Options{Gold: gold})
			if err != nil {
				t.Fatal(err)
			}
			checkFinite(t, r)
			if r.Class[0] != 1 || r.Row(0)[1] != 1 || !r.IsGold[0] || r.IsGold[1] {
				t.Errorf("%s: gold item not clamped: %v", m, r.Row(0))
			}
			for _, u := range Uncertain(r, 0.95) {
				if u == 0 {
					t.Errorf("%s: gold item listed as uncertain", m)
				}
			}
		}
		if _, err := DawidSkene(l, Options{Gold: []int{2, -1, -1}}); err == nil {
			t.Error("gold class out of range: want an error")
		}
	})
	t.Run("bad input", func(t *testing.T) {
		l := &Labels{NItems: 1, NAnnotators: 1, NClasses: 2, Item: []int32{0}, Annotator: []int32{0}, Class: []uint8{2}}
		if _, err := DawidSkene(l, Options{}); err == nil {
			t.Error("class out of range: want an error")
		}
		if _, err := Combine("vote", &Labels{NClasses: 2}, Options{}); err == nil {
			t.Error("unknown method: want an error")
		}
		if _, err := DawidSkene(&Labels{NClasses: 2}, Options{Smoothing: math.NaN()}); err == nil {
			t.Error("NaN smoothing: want an error")
		}
	})
}

// The float32 path (from 4,194,304 labels) must agree with the float64 one;
// run here on a crowd small enough to be quick by lowering nothing but
// comparing both element types directly.
func TestEMFloat32MatchesFloat64(t *testing.T) {
	c := simulate(simConfig{items: 2000, annotators: 40, perItem: 5, classes: 5, seed: 11,
		acc: func(a int) float64 { return 0.4 + 0.5*float64(a%7)/6 }})
	o := Options{Tol: 1e-9}
	r64, err := emRun[float64](MethodDawidSkene, c.labels, o)
	if err != nil {
		t.Fatal(err)
	}
	r32, err := emRun[float32](MethodDawidSkene, c.labels, o)
	if err != nil {
		t.Fatal(err)
	}
	diff := 0
	for i := range r64.Class {
		if r64.Class[i] != r32.Class[i] {
			diff++
		}
	}
	if diff > 2 || math.Abs(r64.LogLik-r32.LogLik) > 1e-3*math.Abs(r64.LogLik) {
		t.Errorf("float32 vs float64: %d classes differ, log-likelihood %v vs %v", diff, r32.LogLik, r64.LogLik)
	}
	// Workers do not change the answer.
	r1, _ := emRun[float64](MethodDawidSkene, c.labels, Options{Tol: 1e-9, Workers: 1})
	r3, _ := emRun[float64](MethodDawidSkene, c.labels, Options{Tol: 1e-9, Workers: 3})
	if math.Abs(r1.LogLik-r3.LogLik) > 1e-6 || r1.Iterations != r3.Iterations {
		t.Errorf("1 vs 3 workers: %v (%d it) vs %v (%d it)", r1.LogLik, r1.Iterations, r3.LogLik, r3.Iterations)
	}
}
