package crowd

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// Source: the formula of Fleiss (1971), "Measuring nominal scale agreement
// among many raters", Psychological Bulletin 76(5):378–382, on the widely
// reproduced 10 subjects × 14 raters × 5 categories worked example
// (Wikipedia, "Fleiss' kappa"): P̄ = 0.378, P̄e = 0.2128, κ = 0.210
// (copied into testdata/README.md).
func TestFleiss1971(t *testing.T) {
	rows := "0 0 0 0 14 / 0 2 6 4 2 / 0 0 3 5 6 / 0 3 9 2 0 / 2 2 8 1 1 / 7 7 0 0 0 / 3 2 6 3 0 / 2 5 3 2 2 / 6 5 2 1 0 / 0 2 2 3 7"
	var counts []int
	for _, f := range strings.Fields(strings.ReplaceAll(rows, "/", " ")) {
		v, _ := strconv.Atoi(f)
		counts = append(counts, v)
	}
	k, err := FleissKappa(counts, 5)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name      string
		got, want float64
		tol       float64
	}{{"P̄", k.Po, 0.378, 5e-4}, {"P̄e", k.Pe, 0.2128, 5e-5}, {"κ", k.Kappa, 0.210, 5e-4}} {
		if math.Abs(c.got-c.want) > c.tol {
			t.Errorf("%s = %.4f, want %.4f", c.name, c.got, c.want)
		}
	}
	// The same through Agree, from labels: 14 raters per subject.
	l := &Labels{NItems: 10, NAnnotators: 14, NClasses: 5}
	for i := 0; i < 10; i++ {
		r := 0
		for c := 0; c < 5; c++ {
			for range counts[i*5+c] {
				l.Item = append(l.Item, int32(i))
				l.Annotator = append(l.Annotator, int32(r))
				l.Class = append(l.Class, uint8(c))
				r++
			}
		}
	}
	ag, err := Agree(l, AgreementOptions{Reps: 200, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if !ag.Fleiss.Defined || math.Abs(ag.Fleiss.Value-k.Kappa) > 1e-12 {
		t.Errorf("Agree Fleiss = %+v, want %.4f", ag.Fleiss, k.Kappa)
	}
	if !(ag.Fleiss.Lo <= ag.Fleiss.Value && ag.Fleiss.Value <= ag.Fleiss.Hi && ag.Fleiss.Lo < ag.Fleiss.Hi) {
		t.Errorf("bootstrap interval [%v, %v] does not bracket %v", ag.Fleiss.Lo, ag.Fleiss.Hi, ag.Fleiss.Value)
	}
	ag2, _ := Agree(l, AgreementOptions{Reps: 200, Seed: 3})
	if ag2.Fleiss != ag.Fleiss {
		t.Errorf("same seed, different intervals: %+v vs %+v", ag.Fleiss, ag2.Fleiss)
	}
}

// Source: Krippendorff (2011), "Computing Krippendorff's Alpha-Reliability",
// the 4 coders × 12 units example with missing values: α nominal 0.743,
// ordinal 0.815, interval 0.849, ratio 0.797 (copied into testdata/README.md).
func TestKrippendorff2011(t *testing.T) {
	data := []string{
		"1 2 3 3 2 1 4 1 2 . . .",
		"1 2 3 3 2 2 4 1 2 5 . 3",
		". 3 3 3 2 3 4 2 2 5 1 .",
		"1 2 3 3 2 4 4 1 2 5 1 .",
	}
	l := &Labels{NItems: 12, NAnnotators: 4, NClasses: 5}
	for a, row := range data {
		for u, f := range strings.Fields(row) {
			if f == "." {
				continue
			}
			v, _ := strconv.Atoi(f)
			l.Item = append(l.Item, int32(u))
			l.Annotator = append(l.Annotator, int32(a))
			l.Class = append(l.Class, uint8(v-1))
		}
	}
	want := map[Metric]float64{MetricNominal: 0.743, MetricOrdinal: 0.815, MetricInterval: 0.849, MetricRatio: 0.797}
	ag, err := Agree(l, AgreementOptions{Reps: 100, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	for m, w := range want {
		e := ag.Alpha[m]
		if !e.Defined || math.Abs(e.Value-w) > 5e-4 {
			t.Errorf("alpha %s = %.4f (%+v), want %.3f", m, e.Value, e, w)
		}
		if e.Lo > e.Value || e.Hi < e.Value {
			t.Errorf("alpha %s interval [%v, %v] does not bracket %v", m, e.Lo, e.Hi, e.Value)
		}
	}
	// Unit 10 (one value only) is not pairable: 11 units used.
	if n := ag.Alpha[MetricNominal].N; n != 11 {
		t.Errorf("pairable units = %d, want 11", n)
	}
}

// Source: the textbook 2×2 example of Cohen's kappa (50 items: both yes 20,
// A yes/B no 5, A no/B yes 10, both no 15) → p_o 0.70, p_e 0.50, κ 0.40.
func TestCohen2x2(t *testing.T) {
	var x, y []int
	add := func(a, b, n int) {
		for range n {
			x, y = append(x, a), append(y, b)
		}
	}
	add(0, 0, 20)
	add(0, 1, 5)
	add(1, 0, 10)
	add(1, 1, 15)
	k, err := CohenKappa(x, y, 2)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(k.Po-0.70) > 1e-12 || math.Abs(k.Pe-0.50) > 1e-12 || math.Abs(k.Kappa-0.40) > 1e-12 || k.N != 50 {
		t.Errorf("got %+v, want Po 0.70 Pe 0.50 κ 0.40 over 50", k)
	}
	// Missing ratings are skipped.
	x = append(x, -1, 0)
	y = append(y, 1, -1)
	if k2, _ := CohenKappa(x, y, 2); k2 != k {
		t.Errorf("missing ratings changed the result: %+v", k2)
	}
}

func TestAgreementUndefined(t *testing.T) {
	// Both annotators always say class 0: κ undefined, an error, no NaN.
	if _, err := CohenKappa([]int{0, 0, 0}, []int{0, 0, 0}, 3); err == nil {
		t.Error("CohenKappa with Pe = 1: want an error")
	}
	if _, err := CohenKappa([]int{0, -1}, []int{-1, 1}, 3); err == nil {
		t.Error("CohenKappa with no shared item: want an error")
	}
	if _, err := FleissKappa([]int{3, 0, 2, 0}, 2); err == nil {
		t.Error("FleissKappa all one class: want an error")
	}
	if _, err := KrippendorffAlpha([]int{1, 0, 0, 1}, 2, nil, MetricNominal); err == nil {
		t.Error("alpha with no pairable unit: want an error")
	}
	// Empty project through Agree: every figure undefined, with a note.
	ag, err := Agree(&Labels{NClasses: 3}, AgreementOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if ag.Fleiss.Defined || ag.Fleiss.Note == "" || math.IsNaN(ag.Fleiss.Value) {
		t.Errorf("empty Fleiss = %+v", ag.Fleiss)
	}
	for m, e := range ag.Alpha {
		if e.Defined || e.Note == "" || math.IsNaN(e.Value) {
			t.Errorf("empty alpha %s = %+v", m, e)
		}
	}
}

func TestAgreePairsAndLeaveOneOut(t *testing.T) {
	// Three annotators on 30 items: 0 and 1 always agree with the truth,
	// 2 answers at random — leave-one-out kappa must rank 2 last.
	c := simulate(simConfig{items: 30, annotators: 3, perItem: 3, classes: 3, seed: 5,
		acc: func(a int) float64 {
			if a == 2 {
				return -1
			}
			return 1
		}})
	ag, err := Agree(c.labels, AgreementOptions{Reps: 50, Pairs: true, MinShared: 5})
	if err != nil {
		t.Fatal(err)
	}
	if len(ag.Pairs) != 3 {
		t.Fatalf("pairs = %d, want 3", len(ag.Pairs))
	}
	if p := ag.Pairs[0]; p.A != 0 || p.B != 1 || p.Kappa.Value != 1 {
		t.Errorf("pair 0–1 = %+v, want κ 1", p)
	}
	loo := ag.LeaveOneOut
	if !(loo[2].Kappa.Value < loo[0].Kappa.Value && loo[2].Kappa.Value < loo[1].Kappa.Value) {
		t.Errorf("leave-one-out kappas %v %v %v: the random annotator should be last", loo[0].Kappa.Value, loo[1].Kappa.Value, loo[2].Kappa.Value)
	}
}
