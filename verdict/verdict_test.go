package verdict

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"handoff/crowd"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

func TestClopperPearsonOutsideValues(t *testing.T) {
	// Source: Clopper & Pearson (1934) exact intervals computed with scipy
	// 1.10 beta.ppf, two-sided 95% (copied into testdata/README.md); the
	// one-sided bound for 0 of 300 is close to the rule of three 3/n
	// (Hanley & Lippman-Hand 1983).
	cases := []struct {
		k, n   int
		lo, hi float64
	}{
		{7, 20, 0.15391, 0.59219},
		{0, 100, 0, 0.03622},
		{81, 263, 0.25274, 0.36762},
	}
	for _, c := range cases {
		lo, hi := ClopperPearson(c.k, c.n, 0.95)
		if !near(lo, c.lo, 1e-4) || !near(hi, c.hi, 1e-4) {
			t.Errorf("%d of %d: [%.5f, %.5f], want [%.5f, %.5f]", c.k, c.n, lo, hi, c.lo, c.hi)
		}
	}
	// Same source: one-sided 95% upper bound for 0 errors in 300.
	if u := UpperBound(0, 300, 0.95); !near(u, 0.00994, 1e-4) {
		t.Errorf("upper bound 0 of 300 = %.5f, want 0.00994", u)
	}
	// Rule of three (Hanley & Lippman-Hand 1983): 0 of n → about 3/n.
	for _, n := range []int{100, 300, 1000, 5000} {
		u := UpperBound(0, n, 0.95)
		if math.Abs(u-3/float64(n)) > 0.02*3/float64(n) {
			t.Errorf("0 of %d: upper bound %.6f is not within 2%% of 3/n = %.6f", n, u, 3/float64(n))
		}
		// Closed form for k = 0: 1 − 0.05^(1/n).
		if !near(u, 1-math.Pow(0.05, 1/float64(n)), 1e-12) {
			t.Errorf("0 of %d: %v, want 1 − 0.05^(1/n)", n, u)
		}
	}
	if UpperBound(5, 5, 0.95) != 1 {
		t.Error("k = n should bound at 1")
	}
}

// TestCohenKappaTextbook: the verdict's kappa is crowd's (the module's one
// Cohen's kappa), checked on the worked example of Wikipedia's "Cohen's
// kappa" article (50 proposals read by two readers: both yes 20, A yes/B
// no 5, A no/B yes 10, both no 15 → p_o 0.70, p_e 0.50, κ 0.40), and its
// convention: κ is undefined when p_e = 1 (both raters use one and the
// same class), so the held-out agreement says "no estimate" there and the
// stop rule counts identical predictions as unchanged.
func TestCohenKappaTextbook(t *testing.T) {
	k, err := crowd.CohenKappaCounts([][]int{{20, 5}, {10, 15}})
	if err != nil || !near(k.Kappa, 0.40, 1e-12) || !near(k.Po, 0.70, 1e-12) || !near(k.Pe, 0.50, 1e-12) || k.N != 50 {
		t.Errorf("kappa = %+v (%v), want κ 0.40, p_o 0.70, p_e 0.50 over 50", k, err)
	}
	if _, err := crowd.CohenKappaCounts([][]int{{0, 0, 0}, {0, 2, 0}, {0, 0, 0}}); err == nil {
		t.Error("one shared class: kappa defined, want undefined (p_e = 1)")
	}
	truth := []int{1, 1, 1, 1}
	a, err := Agree(truth, truth, []string{"a", "b"}, 50, 0.95, 1)
	if err != nil || !strings.HasPrefix(a.KappaNote, "no estimate") || a.Accuracy.Est != 1 {
		t.Errorf("all one class: kappa %+v, note %q (%v), want no estimate", a.Kappa, a.KappaNote, err)
	}
	s := Stability([][]int{{1, 1, 1}, {1, 1, 1}, {0, 1, 1}}, 2, 0.99, 1)
	if len(s.Kappas) != 2 || s.Kappas[0] != 1 || s.Kappas[1] >= 0.99 {
		t.Errorf("stop rule kappas %v, want 1 for identical one-class rounds, then below 0.99", s.Kappas)
	}
}

func TestAgreeHandComputed(t *testing.T) {
	// Hand-computed with the usual definitions (as scikit-learn's
	// precision_recall_fscore_support): class 0 P 1 R 2/3 F1 0.8; class 1
	// P 1/2 R 1/2 F1 1/2; class 2 P 1/2 R 1 F1 2/3.
	truth := []int{0, 0, 0, 1, 1, 2}
	pred := []int{0, 0, 1, 1, 2, 2}
	a, err := Agree(truth, pred, []string{"a", "b", "c"}, 500, 0.95, 1)
	if err != nil {
		t.Fatal(err)
	}
	if !near(a.Accuracy.Est, 4.0/6, 1e-12) || !near(a.MacroF1.Est, (0.8+0.5+2.0/3)/3, 1e-12) {
		t.Errorf("accuracy %v macro-F1 %v", a.Accuracy.Est, a.MacroF1.Est)
	}
	wantP := []float64{1, 0.5, 0.5}
	wantR := []float64{2.0 / 3, 0.5, 1}
	for j, c := range a.Classes {
		if !near(c.Precision.Est, wantP[j], 1e-12) || !near(c.Recall.Est, wantR[j], 1e-12) {
			t.Errorf("class %s: P %v R %v, want %v %v", c.Class, c.Precision.Est, c.Recall.Est, wantP[j], wantR[j])
		}
	}
	// p_o = 4/6; rows 3,2,1 and columns 2,2,2 of 6: p_e = (6+4+2)/36 = 1/3.
	if want := (4.0/6 - 1.0/3) / (1 - 1.0/3); !near(a.Kappa.Est, want, 1e-12) {
		t.Errorf("kappa %v, want %v", a.Kappa.Est, want)
	}
	if !reflect.DeepEqual(a.Confusion, [][]int{{2, 1, 0}, {0, 1, 1}, {0, 0, 1}}) {
		t.Errorf("confusion %v", a.Confusion)
	}
	if _, err := Agree([]int{0}, []int{3}, []string{"a", "b"}, 10, 0.95, 1); err == nil {
		t.Error("class outside the codebook accepted")
	}
}

func TestBootstrapIntervals(t *testing.T) {
	// 400 items, machine right with probability 0.8: the percentile
	// interval for accuracy should be close to the normal one,
	// 0.8 ± 1.96·√(0.8·0.2/400) = ± 0.039, contain the estimate, and
	// repeat exactly for the same seed.
	r := rand.New(rand.NewPCG(9, 9))
	truth := make([]int, 400)
	pred := make([]int, 400)
	for i := range truth {
		truth[i] = r.IntN(2)
		pred[i] = truth[i]
		if r.Float64() > 0.8 {
			pred[i] = 1 - truth[i]
		}
	}
	a, err := Agree(truth, pred, []string{"no", "yes"}, 0, 0, 42)
	if err != nil {
		t.Fatal(err)
	}
	if a.B != 1000 || a.Level != 0.95 {
		t.Errorf("defaults B %d level %v", a.B, a.Level)
	}
	half := 1.96 * math.Sqrt(a.Accuracy.Est*(1-a.Accuracy.Est)/400)
	if !near(a.Accuracy.Hi-a.Accuracy.Lo, 2*half, 0.2*2*half) {
		t.Errorf("accuracy interval %v, width far from normal approximation %v", a.Accuracy, 2*half)
	}
	for _, v := range []Interval{a.Accuracy, a.Kappa, a.MacroF1, *a.Classes[0].Precision, a.Cells[0][1]} {
		if !(v.Lo <= v.Est && v.Est <= v.Hi) {
			t.Errorf("interval %+v does not contain its estimate", v)
		}
	}
	b, _ := Agree(truth, pred, []string{"no", "yes"}, 0, 0, 42)
	c, _ := Agree(truth, pred, []string{"no", "yes"}, 0, 0, 43)
	if !reflect.DeepEqual(a, b) {
		t.Error("same seed, different intervals")
	}
	if reflect.DeepEqual(a, c) {
		t.Error("different seed, same intervals")
	}
}

func TestCrowdCeiling(t *testing.T) {
	ann := []Annotator{{"a", 0.5, 0.70, 10}, {"b", 0.7, 0.80, 10}, {"c", 0.6, 0.75, 10}, {"d", 0.9, 0.95, 10}}
	c, err := CrowdCeiling(ann, 0.66, 0.80, 120)
	if err != nil {
		t.Fatal(err)
	}
	// Type 7 quantiles of 0.5 0.6 0.7 0.9 (R: quantile(x, c(.25,.5,.75))):
	// 0.575, 0.65, 0.75; median agreement of 0.70 0.75 0.80 0.95: 0.775.
	if !near(c.Q1, 0.575, 1e-12) || !near(c.Median, 0.65, 1e-12) || !near(c.Q3, 0.75, 1e-12) || !near(c.MedianAgreement, 0.775, 1e-12) || !c.AtLeastMedian {
		t.Errorf("ceiling %+v", c)
	}
	if c.Annotators[0].ID != "d" {
		t.Errorf("annotators not sorted by kappa: %v", c.Annotators)
	}
	// The gate compares agreements, not kappas.
	if c, _ := CrowdCeiling(ann, 0.99, 0.77, 120); c.AtLeastMedian {
		t.Error("agreement 0.77 counted as at least the median 0.775")
	}
	if c, _ := CrowdCeiling(ann, 0.99, 1, 0); c.AtLeastMedian {
		t.Error("a machine that would autolabel nothing passed the gate")
	}
	if _, err := CrowdCeiling([]Annotator{{"x", math.NaN(), 0.5, 1}}, 0, 0, 1); err == nil {
		t.Error("NaN kappa accepted")
	}
	if _, err := CrowdCeiling([]Annotator{{"x", 0.5, 1.5, 1}}, 0, 0, 1); err == nil {
		t.Error("agreement 1.5 accepted")
	}
}

func TestExactClassIntervals(t *testing.T) {
	// The degenerate cases of a bootstrap: a class predicted 11 times and
	// never right, a class predicted twice and right both times, a class
	// never predicted. Exact intervals (scipy 1.10 beta.ppf, two-sided
	// 95%): 0 of 11 → [0, 0.28492]; 2 of 2 → [0.15811, 1].
	var truth, pred []int
	add := func(t, p, n int) {
		for range n {
			truth, pred = append(truth, t), append(pred, p)
		}
	}
	add(0, 1, 11) // class 1 predicted 11 times, all wrong
	add(2, 2, 2)  // class 2 predicted twice, both right
	add(0, 0, 30)
	a, err := Agree(truth, pred, []string{"a", "b", "c", "d"}, 100, 0.95, 1)
	if err != nil {
		t.Fatal(err)
	}
	b, c, d := a.Classes[1], a.Classes[2], a.Classes[3]
	if b.Precision == nil || b.Precision.Est != 0 || b.Precision.Lo != 0 || !near(b.Precision.Hi, 0.28492, 1e-4) {
		t.Errorf("0 of 11: %+v", b.Precision)
	}
	if b.Recall != nil {
		t.Errorf("class b has no support, recall %+v (want no estimate)", b.Recall)
	}
	if c.Precision == nil || c.Precision.Est != 1 || c.Precision.Hi != 1 || !near(c.Precision.Lo, 0.15811, 1e-4) {
		t.Errorf("2 of 2: %+v", c.Precision)
	}
	if d.Precision != nil || d.Recall != nil {
		t.Errorf("class d never occurs: %+v %+v (want no estimates)", d.Precision, d.Recall)
	}
	var txt bytes.Buffer
	rep := &Report{Classes: []string{"a", "b", "c", "d"}, Agreement: a, Settings: Settings{Look: 1}}
	rep.WriteText(&txt)
	for _, bad := range []string{"0.000 [0.000, 0.000]", "1.000 [1.000, 1.000]", "1.000 [0.000, 1.000]"} {
		if strings.Contains(txt.String(), bad) {
			t.Errorf("report shows the degenerate interval %q:\n%s", bad, txt.String())
		}
	}
	if !strings.Contains(txt.String(), "no estimate (0 predicted)") {
		t.Errorf("report does not say 'no estimate' for a class never predicted:\n%s", txt.String())
	}
}

func TestLookAlphaSumsToAlpha(t *testing.T) {
	sum := 0.0
	for r := 1; r <= 1_000_000; r++ {
		sum += LookAlpha(0.05, r)
	}
	// Σ_{r≤R} 1/(r(r+1)) = 1 − 1/(R+1).
	if !near(sum, 0.05*(1-1.0/1_000_001), 1e-12) {
		t.Errorf("α spent over a million looks: %v", sum)
	}
	if !near(LookAlpha(0.05, 1), 0.025, 1e-15) || !near(LookAlpha(0.05, 10), 0.05/110, 1e-15) {
		t.Errorf("α_1 %v α_10 %v", LookAlpha(0.05, 1), LookAlpha(0.05, 10))
	}
}

func TestLooksTightenTheBound(t *testing.T) {
	// The same data at a later look is tested at a smaller α_r: the bound
	// grows and the minimum count with it, so a GO at look 1 may be a NOT
	// YET at look 20.
	in := sample(1, 2000, []string{"a", "b"})
	in.Annotators = []Annotator{{"x", 0.6, 0.7, 40}}
	var covered []int
	for _, look := range []int{1, 5, 20} {
		in.Look = look
		rep, err := Compute(in, Options{Bootstrap: 50})
		if err != nil {
			t.Fatal(err)
		}
		s := rep.Settings
		if s.Look != look || !near(s.LookAlpha, 0.05/float64(look*(look+1)), 1e-15) || s.MinCount != MinCountFor(0.05, 1-s.LookAlpha) {
			t.Errorf("look %d: settings %+v", look, s)
		}
		if rep.Threshold.Found {
			if !near(rep.Threshold.Upper, UpperBound(rep.Threshold.Errors, rep.Threshold.N, 1-s.LookAlpha), 1e-12) {
				t.Errorf("look %d: bound %v not at level 1 − α_r", look, rep.Threshold.Upper)
			}
			covered = append(covered, rep.Threshold.N)
		}
		var txt bytes.Buffer
		rep.WriteText(&txt)
		if !strings.Contains(txt.String(), fmt.Sprintf("Look %d:", look)) {
			t.Errorf("look %d: the report does not say which look it is:\n%s", look, txt.String())
		}
	}
	if len(covered) != 3 || !(covered[0] > covered[1] && covered[1] > covered[2]) {
		t.Errorf("covered held-out items at looks 1, 5, 20: %v, want GO at each with fewer items covered as α_r shrinks", covered)
	}
}

func TestUnsettledCountAsDisagreements(t *testing.T) {
	// 300 settled items, all right at confidence 0.99; 5 unsettled ones at
	// 0.995 (covered by every threshold). They count as disagreements: the
	// chosen threshold's errors include them.
	in := Input{Classes: []string{"a", "b"}, Look: 1}
	for range 300 {
		in.Truth = append(in.Truth, 0)
		in.Proba = append(in.Proba, []float64{0.99, 0.01})
	}
	for range 5 {
		in.Unsettled = append(in.Unsettled, []float64{0.995, 0.005})
	}
	in.Standard = &Standard{Level: 0.99, Cap: 9, Members: 400, Share: 0.2, Met: 300, Below: 5, Waiting: 95}
	rep, err := Compute(in, Options{Bootstrap: 50, NoMedianGate: true})
	if err != nil {
		t.Fatal(err)
	}
	th := rep.Threshold
	if !th.Found || th.N != 305 || th.Errors != 5 || th.Unsettled != 5 {
		t.Errorf("threshold %+v: want 305 covered, 5 disagreements, all unsettled", th)
	}
	if rep.Agreement.N != 300 || rep.Agreement.Accuracy.Est != 1 {
		t.Errorf("agreement uses only settled items: n %d accuracy %v", rep.Agreement.N, rep.Agreement.Accuracy.Est)
	}
	// Without the unsettled items the bound would pass with 0 errors.
	in.Unsettled = nil
	rep2, _ := Compute(in, Options{Bootstrap: 50, NoMedianGate: true})
	if rep2.Threshold.Upper >= th.Upper {
		t.Errorf("unsettled items did not raise the bound: %v vs %v", rep2.Threshold.Upper, th.Upper)
	}
}

func TestTruthBound(t *testing.T) {
	// Gold: the consensus errs on 2 of 80 gold items. The bound against the
	// truth is the disagreement bound plus the consensus-error bound, each
	// at level 1 − α_r/2.
	in := sample(1, 1500, []string{"a", "b"})
	in.Look = 2
	in.Gold = &GoldCounts{Items: 80, Errors: 2}
	rep, err := Compute(in, Options{Bootstrap: 50, NoMedianGate: true})
	if err != nil {
		t.Fatal(err)
	}
	tb := rep.Truth
	if tb == nil || !rep.Threshold.Found {
		t.Fatalf("no truth bound: %+v", rep.Threshold)
	}
	lv := 1 - LookAlpha(0.05, 2)/2
	th := rep.Threshold
	if !near(tb.Disagreement, UpperBound(th.Errors, th.N, lv), 1e-12) || !near(tb.ConsensusError, UpperBound(2, 80, lv), 1e-12) ||
		!near(tb.Total, tb.Disagreement+tb.ConsensusError, 1e-12) || tb.Level != lv {
		t.Errorf("truth bound %+v", tb)
	}
	var txt bytes.Buffer
	rep.WriteText(&txt)
	for _, want := range []string{"disagreement bound", "consensus-error bound", "machine vs reference", "reference vs truth"} {
		if !strings.Contains(txt.String(), want) {
			t.Errorf("report does not say %q", want)
		}
	}
}

func TestCalibrate(t *testing.T) {
	// Two bins filled: 0.95 (bin 14) with 2 of 4 right, 0.62 and 0.64 (bin
	// 9) both right. ECE = 4/6·|0.5 − 0.95| + 2/6·|1 − 0.63| = 0.42333….
	conf := []float64{0.95, 0.95, 0.95, 0.95, 0.62, 0.64}
	ok := []bool{true, false, true, false, true, true}
	c, err := Calibrate(conf, ok, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Bins) != 15 || !near(c.ECE, 4.0/6*0.45+2.0/6*0.37, 1e-12) {
		t.Errorf("ECE %v with %d bins", c.ECE, len(c.Bins))
	}
	if c.Bins[14].N != 4 || c.Bins[9].N != 2 || !near(c.Bins[9].Confidence, 0.63, 1e-12) {
		t.Errorf("bins %+v", c.Bins)
	}
	// Confidence 1 goes into the last bin.
	c, _ = Calibrate([]float64{1}, []bool{true}, 15)
	if c.Bins[14].N != 1 || c.ECE != 0 {
		t.Errorf("confidence 1: %+v", c)
	}
	if _, err := Calibrate([]float64{1.2}, []bool{true}, 15); err == nil {
		t.Error("confidence 1.2 accepted")
	}
}

func TestStability(t *testing.T) {
	base := make([]int, 200)
	for i := range base {
		base[i] = i % 3
	}
	flip := func(k int) []int {
		x := append([]int(nil), base...)
		for i := 0; i < k; i++ {
			x[i] = (x[i] + 1) % 3
		}
		return x
	}
	cases := []struct {
		rounds [][]int
		stable bool
	}{
		{[][]int{flip(40), flip(20), base, base, base}, false}, // kappas: <.99, <.99, 1, 1 — two stable rounds
		{[][]int{flip(40), base, base, base, base}, true},      // three kappas of 1
		{[][]int{base, base, base}, false},                     // only two comparisons
		{[][]int{base, flip(1), flip(1), flip(1)}, true},       // one change in 200: κ ≈ 0.9925 ≥ 0.99
		{[][]int{base, flip(2), flip(2), flip(2)}, false},      // two changes: κ ≈ 0.985
	}
	for i, c := range cases {
		s := Stability(c.rounds, 3, 0, 0)
		if s.Stable != c.stable {
			t.Errorf("case %d: stable %v, want %v (kappas %v)", i, s.Stable, c.stable, s.Kappas)
		}
	}
	if s := Stability([][]int{base, flip(2), flip(2), flip(2)}, 3, 0.98, 2); !s.Stable {
		t.Errorf("window 2 at 0.98: not stable (kappas %v)", s.Kappas)
	}
}

func TestFitCurve(t *testing.T) {
	// Points exactly on err = 2·n^−0.5 + 0.03 up to 1,600 labels: the fit
	// recovers the curve; n* = (2 / (0.06 − 0.03))² = 4,444 lies within 3×
	// the labels spent, so there is an estimate with an interval.
	var pts []CurvePoint
	for _, n := range []int{100, 200, 400, 800, 1600} {
		pts = append(pts, CurvePoint{n, 2*math.Pow(float64(n), -0.5) + 0.03})
	}
	f, err := FitCurve(pts, CurveOptions{Target: 0.06})
	if err != nil {
		t.Fatal(err)
	}
	if !near(f.A, 2, 2e-3) || !near(f.B, 0.5, 2e-4) || !near(f.C, 0.03, 1e-5) || f.R2 < 0.999 {
		t.Errorf("fit %+v, want a 2 b 0.5 c 0.03", f)
	}
	if math.Abs(float64(f.LabelsAt-4445)) > 10 || f.More != f.LabelsAt-1600 || f.MoreLo > f.More || f.MoreHi < f.More {
		t.Errorf("labels at target %d (more %d [%d, %d]), want about 4,445", f.LabelsAt, f.More, f.MoreLo, f.MoreHi)
	}
	// Target 0.05: n* = 10,000 > 3 × 1,600: no estimate.
	if _, err := FitCurve(pts, CurveOptions{Target: 0.05}); !errors.Is(err, ErrNoEstimate) || !strings.Contains(err.Error(), "3×") {
		t.Errorf("extrapolation to 6× the labels spent: %v", err)
	}
	// A cap below n*: no estimate either.
	if _, err := FitCurve(pts, CurveOptions{Target: 0.06, Cap: 3000}); !errors.Is(err, ErrNoEstimate) {
		t.Errorf("estimate beyond the cap: %v", err)
	}
	// Three points are too few.
	if _, err := FitCurve(pts[:3], CurveOptions{Target: 0.06}); !errors.Is(err, ErrNoEstimate) {
		t.Errorf("three points: %v", err)
	}
	// A flat curve and a noisy one give no estimate.
	flat := []CurvePoint{{100, 0.2}, {200, 0.2}, {300, 0.2}, {400, 0.2}}
	if _, err := FitCurve(flat, CurveOptions{Target: 0.1}); !errors.Is(err, ErrNoEstimate) {
		t.Errorf("flat curve: %v", err)
	}
	noisy := []CurvePoint{{100, 0.2}, {200, 0.3}, {300, 0.1}, {400, 0.3}, {500, 0.15}}
	if _, err := FitCurve(noisy, CurveOptions{Target: 0.05}); !errors.Is(err, ErrNoEstimate) || !strings.Contains(err.Error(), "poorly") {
		t.Errorf("noisy curve: %v", err)
	}
	// A floor above the target: no estimate, and the floor never exceeds
	// the error reached.
	r := rand.New(rand.NewPCG(3, 3))
	pts = pts[:0]
	for _, n := range []int{50, 100, 200, 300, 500, 800, 1200} {
		pts = append(pts, CurvePoint{n, 1.5*math.Pow(float64(n), -0.7) + 0.08 + 0.003*r.NormFloat64()})
	}
	if _, err := FitCurve(pts, CurveOptions{Target: 0.05}); !errors.Is(err, ErrNoEstimate) || !strings.Contains(err.Error(), "levels off") {
		t.Errorf("floor above the target: %v", err)
	}
	g := fitPower(pts, pts[len(pts)-1].Error, true)
	if g.C < 0 || g.C > pts[len(pts)-1].Error || g.B < MinExponent || g.B > MaxExponent || !near(g.C, 0.08, 0.015) {
		t.Errorf("constrained fit %+v: floor near 0.08 within [0, last error], exponent in range", g.PowerLaw)
	}
	// Already at the target: 0 more.
	done := []CurvePoint{{100, 0.3}, {200, 0.2}, {400, 0.12}, {800, 0.08}}
	if f, err := FitCurve(done, CurveOptions{Target: 0.1}); err != nil || f.More != 0 {
		t.Errorf("target reached: %+v %v", f, err)
	}
}

func TestCoverageRiskFixedSequence(t *testing.T) {
	// 1000 items at distinct confidences, best first. The top 300 are all
	// right, items 300–399 have 10 errors, then the rest all wrong.
	// minCount 100: thresholds with N ≥ 100 are tested from the top; the
	// walk passes while the bound ≤ 5% and stops at the first failure
	// even though no later threshold would pass either.
	n := 1000
	conf := make([]float64, n)
	wrong := make([]bool, n)
	for i := range conf {
		conf[i] = 1 - float64(i)/float64(2*n)
		wrong[i] = (i >= 300 && i < 400 && i%10 == 0) || i >= 400
	}
	arch := []float64{0.99, 0.9, 0.85, 0.6}
	pts, th, err := CoverageRisk(conf, wrong, arch, 0.05, 0.95, 100)
	if err != nil {
		t.Fatal(err)
	}
	if len(pts) != n || !th.Found {
		t.Fatalf("%d points, found %v", len(pts), th.Found)
	}
	// Expected: the last passing N is the largest N whose CP bound ≤ 0.05.
	want := 0
	errs := 0
	for i := 0; i < n; i++ {
		if wrong[i] {
			errs++
		}
		if i+1 >= 100 {
			if UpperBound(errs, i+1, 0.95) > 0.05 {
				break
			}
			want = i + 1
		}
	}
	if th.N != want || th.Threshold != conf[want-1] {
		t.Errorf("chosen N %d threshold %v, want N %d threshold %v", th.N, th.Threshold, want, conf[want-1])
	}
	for i, p := range pts {
		if p.Tested != (p.N >= 100 && p.N <= want+1) || p.Passed != (p.N >= 100 && p.N <= want) {
			t.Fatalf("point %d (N %d): tested %v passed %v", i, p.N, p.Tested, p.Passed)
		}
	}
	if th.Upper > 0.05 || th.Archive != 0.75 {
		t.Errorf("bound %v archive %v (want ≤ 0.05 and 0.75: 0.99, 0.9 and 0.85 are ≥ %v)", th.Upper, th.Archive, th.Threshold)
	}

	// An early failure ends the walk: put 10 errors among the top 100.
	for i := 0; i < 10; i++ {
		wrong[i*10] = true
	}
	_, th, _ = CoverageRisk(conf, wrong, nil, 0.05, 0.95, 100)
	if th.Found {
		t.Errorf("walk went on past a failing first threshold: %+v", th)
	}
	// Held-out set smaller than the minimum count: nothing tested.
	_, th, _ = CoverageRisk(conf[:50], wrong[:50], nil, 0.05, 0.95, 0)
	if th.Found || th.MinCount != 100 {
		t.Errorf("50 items: %+v", th)
	}
	if MinCountFor(0.01, 0.95) != 473 || MinCountFor(0.05, 0.95) != 100 || MinCountFor(0.05, 1-0.05/110) != 198 {
		t.Errorf("MinCountFor: %d %d", MinCountFor(0.01, 0.95), MinCountFor(0.05, 0.95))
	}
	if _, _, err := CoverageRisk([]float64{math.NaN()}, []bool{true}, nil, 0.05, 0.95, 0); err == nil {
		t.Error("NaN confidence accepted")
	}
}

func TestTiedConfidences(t *testing.T) {
	// Ties share one threshold: all items at a confidence are covered
	// together.
	conf := []float64{0.9, 0.9, 0.8, 0.8, 0.8}
	pts, _, err := CoverageRisk(conf, make([]bool, 5), nil, 0.05, 0.95, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(pts) != 2 || pts[0].N != 2 || pts[1].N != 5 {
		t.Errorf("points %+v", pts)
	}
}

// sample builds a verdict input with a model that is right with
// probability equal to its confidence.
func sample(seed uint64, n int, classes []string) Input {
	r := rand.New(rand.NewPCG(seed, 2))
	k := len(classes)
	in := Input{Classes: classes}
	for i := 0; i < n; i++ {
		t := r.IntN(k)
		c := 0.6 + 0.4*math.Sqrt(r.Float64())
		pred := t
		if r.Float64() > c {
			pred = (t + 1 + r.IntN(k-1)) % k
		}
		p := make([]float64, k)
		for j := range p {
			p[j] = (1 - c) / float64(k-1)
		}
		p[pred] = c
		in.Truth = append(in.Truth, t)
		in.Proba = append(in.Proba, p)
	}
	for i := 0; i < 3000; i++ {
		in.Archive = append(in.Archive, 0.6+0.4*math.Sqrt(r.Float64()))
	}
	return in
}

func TestComputeAndRender(t *testing.T) {
	classes := []string{"<script>alert(1)</script>", "plain & simple", "third"}
	in := sample(1, 1500, classes)
	in.Annotators = []Annotator{{"ann<b>1</b>", 0.61, 0.7, 300}, {"ann2", 0.72, 0.8, 280}, {"ann3", 0.55, 0.66, 150}, {"ann4", 0.8, 0.85, 90}}
	stop := make([]int, 300)
	in.StopSet = [][]int{stop, stop, stop, stop}
	for _, n := range []int{100, 200, 400, 800, 1200} {
		in.Curve = append(in.Curve, CurvePoint{n, 0.9*math.Pow(float64(n), -0.4) + 0.02})
	}
	in.Run = []Setting{{"max-error", "0.05", "stored"}, {"batch", "50", "flag"}}
	in.Compare = &Series{Name: "random <selection>", Points: []CurvePoint{{100, 0.3}, {200, 0.25}, {400, 0.2}}}
	in.Audit = &AuditCounts{Items: 200, Errors: 7}
	rep, err := Compute(in, Options{Seed: 7, Bootstrap: 300, TargetError: 0.07})
	if err != nil {
		t.Fatal(err)
	}
	if !rep.Decision.Go {
		t.Fatalf("expected GO on a strong, calibrated model: %+v", rep.Decision)
	}
	d := rep.Decision
	if d.Bound > 0.05 || d.ArchiveCoverage <= 0 || d.Threshold != rep.Threshold.Threshold {
		t.Errorf("decision %+v", d)
	}
	if rep.Fit == nil || !rep.Fit.Reachable || d.LabelsNeeded != rep.Fit.More || d.LabelsNeeded <= 0 {
		t.Errorf("fit %+v %q, labels needed %d", rep.Fit, rep.FitError, d.LabelsNeeded)
	}
	if rep.Audit == nil || rep.Audit.Errors != 7 || !(rep.Audit.Lo < 0.035 && 0.035 < rep.Audit.Hi) {
		t.Errorf("audit %+v", rep.Audit)
	}

	var txt, js, html bytes.Buffer
	if err := rep.WriteText(&txt); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(txt.String(), "VERDICT  GO") || !strings.Contains(txt.String(), "Cohen's kappa") {
		t.Errorf("text report:\n%s", txt.String())
	}
	if err := rep.WriteJSON(&js); err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(js.Bytes(), &m); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(txt.String(), "batch 50 (flag)") {
		t.Errorf("text report does not print the run's settings:\n%s", txt.String())
	}
	for _, key := range []string{"decision", "agreement", "ceiling", "coverage_risk", "threshold", "calibration", "stop", "curve", "compare", "fit", "audit", "run", "settings"} {
		if _, ok := m[key]; !ok {
			t.Errorf("JSON lacks %q", key)
		}
	}
	if m["decision"].(map[string]any)["go"] != true {
		t.Error("JSON decision.go is not true")
	}
	// A stored JSON report reads back into a Report that renders the same.
	var back Report
	if err := json.Unmarshal(js.Bytes(), &back); err != nil {
		t.Fatal(err)
	}
	var txt2 bytes.Buffer
	back.WriteText(&txt2)
	if txt2.String() != txt.String() {
		t.Error("text of the report read back from JSON differs")
	}
	if err := rep.WriteHTML(&html, "Verdict <for> test"); err != nil {
		t.Fatal(err)
	}
	h := html.String()
	// Learning curve, coverage–risk, reliability, annotators (the confusion
	// matrix is a table).
	if strings.Count(h, "<svg") != 4 {
		t.Errorf("HTML has %d inline SVG plots, want 4", strings.Count(h, "<svg"))
	}
	for _, bad := range []string{"<script", "<b>1", "<selection>", "<for>", "src=", "href=", "@import", "url("} {
		if strings.Contains(h, bad) {
			t.Errorf("HTML contains %q (unescaped text or an external asset)", bad)
		}
	}
	for _, good := range []string{"&lt;script&gt;", "plain &amp; simple", "Verdict &lt;for&gt; test"} {
		if !strings.Contains(h, good) {
			t.Errorf("HTML lacks escaped %q", good)
		}
	}
}

func TestNotYet(t *testing.T) {
	// A weak model (right with probability 0.7 at every confidence),
	// unstable predictions, a machine below the crowd, and an audit far
	// above max-error.
	in := sample(2, 600, []string{"a", "b"})
	for i := range in.Proba {
		in.Proba[i] = []float64{0.7, 0.3}
	}
	r := rand.New(rand.NewPCG(5, 5))
	for i := range in.Truth {
		in.Truth[i] = 0
		if r.Float64() > 0.7 {
			in.Truth[i] = 1
		}
	}
	a, b := make([]int, 100), make([]int, 100)
	for i := range b {
		b[i] = i % 2
	}
	in.StopSet = [][]int{a, b, a, b}
	in.Annotators = []Annotator{{"x", 0.8, 0.85, 50}, {"y", 0.9, 0.95, 50}}
	in.Curve = []CurvePoint{{100, 0.4}, {200, 0.33}, {400, 0.31}, {800, 0.3}}
	in.Audit = &AuditCounts{Items: 100, Errors: 30}
	rep, err := Compute(in, Options{Bootstrap: 100, RequireStable: true})
	if err != nil {
		t.Fatal(err)
	}
	d := rep.Decision
	if d.Go || len(d.Reasons) != 4 || !reflect.DeepEqual(d.HeldBy, []string{GateBound, GateMedian, GateStable, GateAudit}) {
		t.Errorf("want NOT YET held back by 4 gates (bound, median, stop, audit), got %+v", d)
	}
	if d.LabelsNeeded != -1 {
		t.Errorf("labels needed %d, want −1 (curve levels off above the target)", d.LabelsNeeded)
	}
	var txt bytes.Buffer
	rep.WriteText(&txt)
	if !strings.HasPrefix(txt.String(), "VERDICT  NOT YET (held back by: error bound, median annotator, stop rule, audit)") {
		t.Errorf("text:\n%s", txt.String())
	}
	var html bytes.Buffer
	if err := rep.WriteHTML(&html, ""); err != nil {
		t.Fatal(err)
	}
}

func TestComputeBadInput(t *testing.T) {
	in := sample(3, 50, []string{"a", "b"})
	in.Proba[7] = []float64{0.5, math.NaN()}
	if _, err := Compute(in, Options{}); err == nil || !strings.Contains(err.Error(), "item 7") {
		t.Errorf("NaN probability: %v", err)
	}
	in = sample(3, 50, []string{"a", "b"})
	if _, err := Compute(in, Options{MaxError: 1.5}); err == nil {
		t.Error("max-error 1.5 accepted")
	}
	in.Truth[0] = 5
	if _, err := Compute(in, Options{}); err == nil {
		t.Error("consensus class 5 of 2 accepted")
	}
}
