package compare

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
)

// Anscombe (1973), "Graphs in statistical analysis", The American
// Statistician 27(1): four data sets with the same summary figures, among
// them the correlation, r = 0.816 for each set (to within the rounding of
// the published y values: 0.8162–0.8165).
var anscombeX = []float64{10, 8, 13, 9, 11, 14, 6, 4, 12, 7, 5}
var anscombe = []struct {
	x, y []float64
	// scipy 1.10.1 (Debian 12's python3-scipy): scipy.stats.pearsonr and
	// scipy.stats.spearmanr on the same sets, computed once and pasted.
	pearson, spearman float64
}{
	{anscombeX, []float64{8.04, 6.95, 7.58, 8.81, 8.33, 9.96, 7.24, 4.26, 10.84, 4.82, 5.68}, 0.81642051634484, 0.8181818181818182},
	{anscombeX, []float64{9.14, 8.14, 8.74, 8.77, 9.26, 8.10, 6.13, 3.10, 9.13, 7.26, 4.74}, 0.8162365060002428, 0.690909090909091},
	{anscombeX, []float64{7.46, 6.77, 12.74, 7.11, 7.81, 8.84, 6.08, 5.39, 8.15, 6.42, 5.73}, 0.8162867394895982, 0.990909090909091},
	{[]float64{8, 8, 8, 8, 8, 8, 8, 19, 8, 8, 8}, []float64{6.58, 5.76, 7.71, 8.84, 8.47, 7.04, 5.25, 12.50, 5.56, 7.91, 6.89}, 0.816521436888503, 0.5},
}

func TestAnscombePearson(t *testing.T) {
	for i, d := range anscombe {
		r, err := Pearson(d.x, d.y, nil)
		if err != nil {
			t.Fatal(err)
		}
		// Anscombe: r = 0.816 for each set.
		if math.Abs(r-0.816) > 6e-4 {
			t.Errorf("set %d: r = %.4f, Anscombe gives 0.816", i+1, r)
		}
		// scipy.stats.pearsonr (scipy 1.10.1).
		if math.Abs(r-d.pearson) > 1e-12 {
			t.Errorf("set %d: r = %.15f, scipy 1.10.1 gives %.15f", i+1, r, d.pearson)
		}
	}
}

func TestSpearmanScipy(t *testing.T) {
	cases := []struct {
		name string
		x, y []float64
		want float64
	}{
		{"anscombe 1", anscombe[0].x, anscombe[0].y, anscombe[0].spearman},
		{"anscombe 2", anscombe[1].x, anscombe[1].y, anscombe[1].spearman},
		{"anscombe 3", anscombe[2].x, anscombe[2].y, anscombe[2].spearman},
		// Ten of eleven x tied: midranks.
		{"anscombe 4", anscombe[3].x, anscombe[3].y, anscombe[3].spearman},
		// Ties on both sides; scipy.stats.spearmanr (scipy 1.10.1) gives
		// 0.93812095999547.
		{"ties", []float64{1, 2, 2, 3, 4, 4, 4, 5, 6, 7}, []float64{2, 1, 3, 3, 5, 4, 6, 6, 8, 7}, 0.93812095999547},
	}
	for _, c := range cases {
		got, err := Spearman(c.x, c.y, nil)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(got-c.want) > 1e-12 {
			t.Errorf("%s: ρ = %.15f, scipy 1.10.1 gives %.15f", c.name, got, c.want)
		}
	}
}

// Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability",
// section C (nominal data, any number of observers, missing data) and its
// ordinal variant: 4 observers × 12 units, values 1–5, "." missing. The
// paper gives α = 0.743 (nominal) and α = 0.815 (ordinal). The same data
// are the "C" example of R's irr::kripp.alpha.
func TestKrippendorff2011(t *testing.T) {
	rows := []string{
		"1 2 3 3 2 1 4 1 2 . . .",
		"1 2 3 3 2 2 4 1 2 5 . 3",
		". 3 3 3 2 3 4 2 2 5 1 .",
		"1 2 3 3 2 4 4 1 2 5 1 .",
	}
	units := make([][]int, 12)
	for _, row := range rows {
		for u, f := range strings.Fields(row) {
			if f == "." {
				continue
			}
			v, _ := strconv.Atoi(f)
			units[u] = append(units[u], v-1)
		}
	}
	for _, c := range []struct {
		m    Metric
		want float64
	}{{Nominal, 0.743}, {Ordinal, 0.815}} {
		a, err := KrippendorffAlpha(units, 5, c.m, nil)
		if err != nil {
			t.Fatal(err)
		}
		if math.Round(a*1000)/1000 != c.want {
			t.Errorf("%s α = %.4f, Krippendorff (2011) gives %.3f", c.m, a, c.want)
		}
	}
}

// Cohen's kappa against scikit-learn 1.2.1's sklearn.metrics.cohen_kappa_score
// and confusion_matrix on a fixed three-class set (computed once, pasted),
// and the 2×2 textbook arithmetic: 50 items, both yes 20, A yes/B no 5, A
// no/B yes 10, both no 15: p_o = 0.70, p_e = 0.5·0.6 + 0.5·0.4 = 0.50,
// κ = 0.40.
func TestCohenKappaReference(t *testing.T) {
	a := []int{0, 1, 2, 2, 1, 0, 0, 2, 1, 1, 2, 0, 1, 2, 2, 0, 1, 1, 0, 2}
	b := []int{0, 1, 2, 1, 1, 0, 2, 2, 1, 0, 2, 0, 1, 2, 1, 0, 1, 2, 0, 2}
	k, err := CohenKappa(a, b, 3, nil)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(k-0.6240601503759399) > 1e-12 {
		t.Errorf("κ = %.16f, scikit-learn 1.2.1 gives 0.6240601503759399", k)
	}
	want := [][]int{{5, 0, 1}, {1, 5, 1}, {0, 2, 5}}
	got := Confusion(a, b, 3)
	for i := range want {
		for j := range want[i] {
			if got[i][j] != want[i][j] {
				t.Fatalf("confusion = %v, scikit-learn 1.2.1 gives %v", got, want)
			}
		}
	}
	var x, y []int
	add := func(p, q, n int) {
		for range n {
			x, y = append(x, p), append(y, q)
		}
	}
	add(0, 0, 20)
	add(0, 1, 5)
	add(1, 0, 10)
	add(1, 1, 15)
	if k, _ := CohenKappa(x, y, 2, nil); math.Abs(k-0.40) > 1e-12 {
		t.Errorf("2×2 κ = %v, want 0.40", k)
	}
	if acc, _ := Accuracy(x, y, nil); math.Abs(acc-0.70) > 1e-12 {
		t.Errorf("2×2 accuracy = %v, want 0.70", acc)
	}
}

// Every statistic on integer weights equals the statistic on the data with
// each pair repeated that many times (what a bootstrap resample is).
func TestWeightsAreRepeats(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 1))
	n, k := 40, 4
	x, y := make([]int, n), make([]int, n)
	fx, fy := make([]float64, n), make([]float64, n)
	w := make([]float64, n)
	var ex, ey []int
	var efx, efy []float64
	var units, eunits [][]int
	for i := range n {
		x[i] = rng.IntN(k)
		y[i] = x[i]
		if rng.Float64() < 0.4 {
			y[i] = rng.IntN(k)
		}
		fx[i] = float64(rng.IntN(6)) // ties
		fy[i] = fx[i] + rng.NormFloat64()
		w[i] = float64(rng.IntN(3))
		units = append(units, []int{x[i], y[i]})
		for range int(w[i]) {
			ex, ey = append(ex, x[i]), append(ey, y[i])
			efx, efy = append(efx, fx[i]), append(efy, fy[i])
			eunits = append(eunits, []int{x[i], y[i]})
		}
	}
	pairs := []struct {
		name     string
		weighted func() (float64, error)
		repeated func() (float64, error)
	}{
		{"accuracy", func() (float64, error) { return Accuracy(x, y, w) }, func() (float64, error) { return Accuracy(ex, ey, nil) }},
		{"kappa", func() (float64, error) { return CohenKappa(x, y, k, w) }, func() (float64, error) { return CohenKappa(ex, ey, k, nil) }},
		{"alpha nominal", func() (float64, error) { return KrippendorffAlpha(units, k, Nominal, w) }, func() (float64, error) { return KrippendorffAlpha(eunits, k, Nominal, nil) }},
		{"alpha ordinal", func() (float64, error) { return KrippendorffAlpha(units, k, Ordinal, w) }, func() (float64, error) { return KrippendorffAlpha(eunits, k, Ordinal, nil) }},
		{"alpha pairs", func() (float64, error) { return alphaPairs(x, y, k, Ordinal, w) }, func() (float64, error) { return KrippendorffAlpha(eunits, k, Ordinal, nil) }},
		{"pearson", func() (float64, error) { return Pearson(fx, fy, w) }, func() (float64, error) { return Pearson(efx, efy, nil) }},
		{"spearman", func() (float64, error) { return Spearman(fx, fy, w) }, func() (float64, error) { return Spearman(efx, efy, nil) }},
		{"mad", func() (float64, error) { return MeanAbsDiff(fx, fy, w) }, func() (float64, error) { return MeanAbsDiff(efx, efy, nil) }},
	}
	for _, p := range pairs {
		a, err1 := p.weighted()
		b, err2 := p.repeated()
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: %v %v", p.name, err1, err2)
		}
		if math.Abs(a-b) > 1e-10 {
			t.Errorf("%s: weighted %.12f, repeated %.12f", p.name, a, b)
		}
	}
}

func TestUndefined(t *testing.T) {
	cases := []struct {
		name string
		err  error
		want string
	}{
		{"kappa one class", second(CohenKappa([]int{1, 1, 1}, []int{1, 1, 1}, 3, nil)), "one and the same class"},
		{"kappa no pair", second(CohenKappa([]int{-1, 1}, []int{0, -1}, 3, nil)), "no item"},
		{"alpha one class", second(KrippendorffAlpha([][]int{{0, 0}, {0, 0}}, 2, Nominal, nil)), "no disagreement"},
		{"alpha one value", second(KrippendorffAlpha([][]int{{0}, {1}}, 2, Nominal, nil)), "fewer than two"},
		{"pearson flat x", second(Pearson([]float64{1, 1, 1}, []float64{1, 2, 3}, nil)), "first side"},
		{"pearson flat y", second(Pearson([]float64{1, 2, 3}, []float64{2, 2, 2}, nil)), "second side"},
		{"spearman one point", second(Spearman([]float64{1}, []float64{2}, nil)), "fewer than two"},
	}
	for _, c := range cases {
		if c.err == nil || !strings.Contains(c.err.Error(), c.want) {
			t.Errorf("%s: error %v, want one saying %q", c.name, c.err, c.want)
		}
	}
}

func second(_ float64, err error) error { return err }
