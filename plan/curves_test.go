package plan

import (
	"bufio"
	"encoding/json"
	"image"
	"os"
	"slices"
	"strconv"
	"strings"
	"testing"

	"handoff/features"
	"handoff/internal/fixtures"
	"handoff/internal/testproject"
	"handoff/learner"
	"handoff/round"
	"handoff/selector"
)

// curveText reads ../testdata/pkgdesc.jsonl as TF-IDF word 1–2-grams
// (min_df 2, sublinear tf, L2 norm) with the section as the class.
func curveText(t testing.TB) (features.Matrix, []int, int) {
	t.Helper()
	f, err := os.Open("../testdata/pkgdesc.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var texts, secs []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct{ Text, Section string }
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatal(err)
		}
		texts, secs = append(texts, r.Text), append(secs, r.Section)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	keys := slices.Compact(slices.Sorted(slices.Values(secs)))
	y := make([]int, len(secs))
	for i, s := range secs {
		y[i], _ = slices.BinarySearch(keys, s)
	}
	tc := features.DefaultTextConfig()
	tc.MinDF = 2
	v, err := tc.Fit(texts)
	if err != nil {
		t.Fatal(err)
	}
	return v.Transform(texts), y, len(keys)
}

// curveDigits reads ../testdata/digits.csv.gz, draws each 8×8 digit as a
// 64×64 grey image (features.RenderGray), computes the default image
// features and standardises them.
func curveDigits(t testing.TB) (features.Matrix, []int, int) {
	t.Helper()
	pixels, y := fixtures.Digits(t)
	imgs := make([]image.Image, len(pixels))
	for i, px := range pixels {
		imgs[i] = features.RenderGray(px, 8, 8, 8)
	}
	ic := features.DefaultImageConfig()
	x, err := ic.Transform(imgs)
	if err != nil {
		t.Fatal(err)
	}
	s, err := features.FitScaler(x, ic.Names())
	if err != nil {
		t.Fatal(err)
	}
	xs, err := s.Transform(x)
	if err != nil {
		t.Fatal(err)
	}
	return xs, y, 10
}

func seedsUpTo(n int) []uint64 {
	s := make([]uint64, n)
	for i := range s {
		s[i] = uint64(i + 1)
	}
	return s
}

// Uncertainty sampling beats random sampling at equal label budgets on
// most benchmarks (Lewis & Gale 1994, "A sequential algorithm for training
// text classifiers", SIGIR; Settles 2009, "Active Learning Literature
// Survey", UW–Madison TR 1648): averaged over seeds, entropy's test accuracy must be above
// random's at ≥ 80% of the matched budgets (issue 5's target).
//
// FAST VERSION: budgets 100–500 only (initial 50, batches of 50), 10 seeds
// for the texts and 5 for the digits. The full run (budgets 100–1,000, 10
// seeds, both data sets) is bench/active/run.sh; its figures are in
// bench/active/RESULTS.md.
func TestEntropyBeatsRandom(t *testing.T) {
	if testing.Short() {
		t.Skip("fits about 300 models")
	}
	// Tol is pinned so the curves do not move with the learner's default.
	lr := learner.Logistic{Lambda: 0.1, Tol: 1e-6}
	for _, c := range []struct {
		name  string
		load  func(testing.TB) (features.Matrix, []int, int)
		seeds int
	}{
		{"pkgdesc text", curveText, 10},
		{"UCI digits images", curveDigits, 5},
	} {
		t.Run(c.name, func(t *testing.T) {
			X, y, k := c.load(t)
			cmp, err := CompareStrategies(X, y, k, CurveConfig{Learner: lr, MaxLabels: 500}, seedsUpTo(c.seeds))
			if err != nil {
				t.Fatal(err)
			}
			var b strings.Builder
			for i, p := range cmp.Uncertain.Points {
				b.WriteString(strconv.Itoa(p.Labels) + ":" + strconv.FormatFloat(1-p.Error, 'f', 3, 64) + "/" + strconv.FormatFloat(1-cmp.Random.Points[i].Error, 'f', 3, 64) + " ")
			}
			t.Logf("accuracy entropy/random by labels: %s", b.String())
			t.Logf("entropy ahead at %d of %d budgets (%.0f%%)", cmp.Ahead, cmp.Matched, 100*cmp.Share)
			if cmp.Matched != 9 || cmp.Uncertain.Points[1].Labels != 100 || cmp.Uncertain.Points[9].Labels != 500 {
				t.Fatalf("budgets %v, want 50, 100, …, 500", cmp.Uncertain.Points)
			}
			if cmp.Share < 0.8 {
				t.Errorf("entropy ahead of random at %.0f%% of budgets 100–500, want ≥ 80%%", 100*cmp.Share)
			}
			// Learning happens: both curves end well below their start.
			last := len(cmp.Random.Points) - 1
			if cmp.Random.Points[last].Error >= cmp.Random.Points[0].Error-0.1 {
				t.Errorf("random error %v → %v: the learner does not learn", cmp.Random.Points[0].Error, cmp.Random.Points[last].Error)
			}
		})
	}
}

// Invented data (simulation only): one matched pair of curves shares its
// test split and initial set, the curve is deterministic given the seed,
// and the selector never picks test rows (they are HeldOut).
func TestLearningCurveRules(t *testing.T) {
	const n, k = 300, 3
	X := &features.Dense{NRows: n, NCols: 2, Data: make([]float64, 2*n)}
	y := make([]int, n)
	for i := range n {
		y[i] = i % k
		X.Data[2*i] = float64(y[i]) + 0.7*float64((i*7919)%13-6)/6
		X.Data[2*i+1] = float64((i*104729)%17-8) / 8
	}
	cfg := CurveConfig{Initial: 20, Batch: 15, MaxLabels: 80, Seed: 3}
	a, err := LearningCurve(X, y, k, cfg)
	if err != nil {
		t.Fatal(err)
	}
	b, err := LearningCurve(X, y, k, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a, b) {
		t.Errorf("same seed, different curves:\n%v\n%v", a, b)
	}
	want := []int{20, 35, 50, 65, 80}
	var got []int
	for _, p := range a {
		got = append(got, p.Labels)
		if p.Error < 0 || p.Error > 1 {
			t.Errorf("error %v outside [0, 1]", p.Error)
		}
	}
	if !slices.Equal(got, want) {
		t.Errorf("budgets %v, want %v", got, want)
	}
	cfg.Strategy = Random
	r, err := LearningCurve(X, y, k, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if r[0] != a[0] {
		t.Errorf("first points differ (%v, %v): the initial set or test split is not shared", r[0], a[0])
	}

	for _, c := range []struct {
		name string
		cfg  CurveConfig
		y    []int
		want string
	}{
		{"pool too small", CurveConfig{MaxLabels: 250}, y, "fewer than the last budget"},
		{"bad class", CurveConfig{MaxLabels: 100}, append(slices.Clone(y[:n-1]), 7), "class 7"},
		{"bad strategy", CurveConfig{Strategy: selector.Committee}, y, "strategy"},
		{"bad share", CurveConfig{TestShare: 1.5}, y, "test share"},
		{"budget below initial", CurveConfig{Initial: 60, MaxLabels: 40}, y, "below the initial"},
	} {
		_, err := LearningCurve(X, c.y, k, c.cfg)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one saying %q", c.name, err, c.want)
		}
	}
	if _, err := CompareStrategies(X, y, k, CurveConfig{Strategy: Random}, []uint64{1}); err == nil {
		t.Error("random against random: no error")
	}
	if _, err := CompareStrategies(X, y, k, CurveConfig{}, nil); err == nil {
		t.Error("no seeds: no error")
	}
}

// ProjectCurves on an invented project (simulation only): it refuses a
// project without a stored consensus, then runs on the consensus classes,
// deterministically.
func TestProjectCurves(t *testing.T) {
	st, _ := testproject.Small(t, t.TempDir(), 7)
	cfg := ProjectCurveConfig{Seeds: []uint64{1, 2}}
	if _, err := ProjectCurves(st, cfg); err == nil {
		t.Fatal("no consensus yet: no error")
	}
	if _, err := round.Consensus(st, round.DefaultConsensus(), "t"); err != nil {
		t.Fatal(err)
	}
	a, err := ProjectCurves(st, cfg)
	if err != nil {
		t.Fatal(err)
	}
	b, err := ProjectCurves(st, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Uncertain.Points, b.Uncertain.Points) || !slices.Equal(a.Random.Points, b.Random.Points) {
		t.Error("same store and seeds, different curves")
	}
	pts := a.Uncertain.Points
	if len(pts) < 5 || a.Matched != len(pts)-1 || len(a.Random.Points) != len(pts) {
		t.Fatalf("curve of %d points, %d matched", len(pts), a.Matched)
	}
	t.Logf("%d budgets from %d to %d labels; entropy ahead at %d of %d", len(pts), pts[0].Labels, pts[len(pts)-1].Labels, a.Ahead, a.Matched)
	if last := len(pts) - 1; a.Random.Points[last].Error >= a.Random.Points[0].Error {
		t.Errorf("random error %v → %v: nothing learnt", a.Random.Points[0].Error, a.Random.Points[last].Error)
	}
}
