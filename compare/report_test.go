package compare

import (
	"bytes"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// The percentile interval of Pearson's r over 60 points of a bivariate
// normal with ρ = 0.6 covers ρ in about 95% of 200 seeded data sets (the
// percentile bootstrap of r is known to run a little short in small
// samples; 88–99% passes).
func TestBootstrapCoverage(t *testing.T) {
	if testing.Short() {
		t.Skip("200 data sets × 500 resamples")
	}
	const rho, n, trials = 0.6, 60, 200
	covered := 0
	for tr := range trials {
		rng := rand.New(rand.NewPCG(11, uint64(tr)))
		x, y := make([]float64, n), make([]float64, n)
		for i := range n {
			a, b := rng.NormFloat64(), rng.NormFloat64()
			x[i], y[i] = a, rho*a+math.Sqrt(1-rho*rho)*b
		}
		e := Estimated(n, Bootstrap{Reps: 500, Seed: uint64(tr)}, func(w []float64) (float64, error) { return Pearson(x, y, w) })
		if e.Lo <= rho && rho <= e.Hi {
			covered++
		}
	}
	if c := float64(covered) / trials; c < 0.88 || c > 0.99 {
		t.Errorf("coverage %.3f, want about 0.95", c)
	}
}

func TestEstimatedDeterministicAndBracketing(t *testing.T) {
	x := []int{0, 1, 1, 0, 2, 2, 1, 0, 0, 1, 2, 2, 0, 1}
	y := []int{0, 1, 0, 0, 2, 1, 1, 0, 1, 1, 2, 2, 0, 2}
	f := func(w []float64) (float64, error) { return CohenKappa(x, y, 3, w) }
	a := Estimated(len(x), Bootstrap{Reps: 300, Seed: 4}, f)
	b := Estimated(len(x), Bootstrap{Reps: 300, Seed: 4}, f)
	c := Estimated(len(x), Bootstrap{Reps: 300, Seed: 5}, f)
	if a != b {
		t.Errorf("same seed, different estimates: %+v %+v", a, b)
	}
	if a == c {
		t.Errorf("another seed gave the very same interval: %+v", a)
	}
	if !a.Defined || a.Lo > a.Value || a.Hi < a.Value || a.Hi-a.Lo <= 0 || a.Reps < 285 {
		t.Errorf("estimate %+v: want a proper interval around the value", a)
	}
	// A statistic undefined in most resamples gets no interval.
	one := []int{0, 0, 0, 0, 0, 0, 0, 0, 0, 1}
	g := Estimated(len(one), Bootstrap{Reps: 300, Seed: 1}, func(w []float64) (float64, error) { return CohenKappa(one, one, 2, w) })
	if !g.Defined || g.Reps != 0 || !strings.Contains(g.Note, "resamples") {
		t.Errorf("estimate %+v: want the value with no interval and a note", g)
	}
	if s := g.String(); !strings.Contains(s, "no interval") {
		t.Errorf("String() = %q", s)
	}
}

func TestCompareItemsAndParents(t *testing.T) {
	// Too few items: no estimate yet, and the text says so.
	it := CompareItems([]int{0, 1, -1, 1}, []int{0, 1, 1, -1}, 2, Nominal, Options{})
	if it.N != 2 || it.Accuracy.Defined || !strings.Contains(it.Note, "need at least 10") {
		t.Errorf("items %+v: want 2 items and no estimate", it)
	}
	rng := rand.New(rand.NewPCG(3, 3))
	n := 200
	x, y := make([]int, n), make([]int, n)
	for i := range n {
		x[i] = rng.IntN(4)
		y[i] = x[i]
		if rng.Float64() < 0.2 {
			y[i] = rng.IntN(4)
		}
	}
	it = CompareItems(x, y, 4, Ordinal, Options{Bootstrap: Bootstrap{Reps: 400, Seed: 1}})
	acc, _ := Accuracy(x, y, nil)
	if it.N != n || it.Accuracy.Value != acc || !it.Kappa.Defined || !it.Alpha.Defined || it.Metric != Ordinal {
		t.Errorf("items %+v", it)
	}
	tot := 0
	for _, row := range it.Confusion {
		for _, v := range row {
			tot += v
		}
	}
	if tot != n {
		t.Errorf("confusion sums to %d, want %d", tot, n)
	}
	names := make([]string, 30)
	px, py := make([]float64, 30), make([]float64, 30)
	for g := range px {
		names[g] = string(rune('a'+g%26)) + strings.Repeat("x", g/26)
		px[g] = rng.Float64()
		py[g] = math.Min(1, math.Max(0, px[g]+0.1*rng.NormFloat64()))
	}
	p := CompareParents("litter", "share of litter", 0, 1, names, px, py, Options{Bootstrap: Bootstrap{Reps: 400, Seed: 1}})
	if p.N != 30 || !p.Pearson.Defined || p.Pearson.Value < 0.8 || !p.MAD.Defined || len(p.Points) != 30 {
		t.Errorf("parents %+v", p)
	}
	few := CompareParents("position", "mean position", 1, 4, names[:4], px[:4], py[:4], Options{})
	if few.Pearson.Defined || few.Note == "" {
		t.Errorf("4 parents: %+v, want no estimate", few)
	}
	flat := CompareParents("position", "mean position", 1, 4, names, px, make([]float64, 30), Options{Bootstrap: Bootstrap{Reps: 50}})
	if flat.Pearson.Defined || !strings.Contains(flat.Pearson.Note, "zero variance") || !flat.MAD.Defined {
		t.Errorf("flat side: %+v, want r undefined for zero variance and MAD defined", flat)
	}
	r := &Report{Classes: []string{"a", "b", "c", "d"}, Ordinal: true, Comparisons: []Comparison{
		{Kind: "waves", A: "wave 1", B: "wave 2", Items: it, Parents: []Parents{p, flat}},
		{Kind: "reference", A: "crowd consensus", B: "experts", ItemsNote: "the reference codes parents, not items", Parents: []Parents{few}},
	}}
	var text bytes.Buffer
	if err := r.WriteText(&text); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"wave 1 vs wave 2", "Krippendorff's alpha (ordinal)", "confusion matrix", "share of litter",
		"no estimate yet", "zero variance", "crowd consensus vs experts", "the reference codes parents", "4 parents; need at least 10"} {
		if !strings.Contains(text.String(), want) {
			t.Errorf("text lacks %q:\n%s", want, text.String())
		}
	}
	var html bytes.Buffer
	if err := r.WriteHTML(&html, ""); err != nil {
		t.Fatal(err)
	}
	h := html.String()
	if strings.Count(h, "<svg") != 3 || !strings.Contains(h, "45° line") || !strings.Contains(h, "Cohen's kappa") {
		t.Errorf("html: %d plots; want 3 scatter plots (one per scale) with the 45° line", strings.Count(h, "<svg"))
	}
}

func TestRollupSharePosition(t *testing.T) {
	class := []int{0, 1, 1, -1, 2, 2, 2, 0}
	parent := []int{0, 0, 0, 0, 1, 1, -1, 2}
	c := Rollup(class, parent, 4, 3)
	if s, ok := Share(c[0], 1); !ok || math.Abs(s-2.0/3) > 1e-12 {
		t.Errorf("share = %v %v, want 2/3", s, ok)
	}
	if p, ok := Position(c[0]); !ok || math.Abs(p-(1+2+2)/3.0) > 1e-12 {
		t.Errorf("position = %v, want 5/3", p)
	}
	if _, ok := Share(c[3], 0); ok {
		t.Errorf("an empty parent has a share")
	}
	if p, _ := Position(c[1]); p != 3 {
		t.Errorf("position = %v, want 3", p)
	}
}
