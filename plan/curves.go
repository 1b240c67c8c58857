package plan

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"strings"
	"sync"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
	"handoff/learner"
	"handoff/round"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

// Random is the baseline strategy of a simulated learning curve: each batch
// is the next items of a seeded random order of the pool (passive
// learning). It is not a selector strategy; CurveConfig accepts it beside
// selector.Entropy, selector.Margin and selector.LeastConfidence.
const Random selector.Strategy = "random"

// CurveConfig configures a simulated pool-based active-learning run with a
// known oracle (LearningCurve). Zero values are defaults.
type CurveConfig struct {
	// Learner is refitted at every budget; nil means
	// learner.Logistic{Lambda: 0.1}.
	Learner learner.Learner
	// Strategy picks each batch: selector.Entropy ("" too),
	// selector.Margin, selector.LeastConfidence (scored and picked by
	// selector.Select) or Random.
	Strategy selector.Strategy
	// Seed fixes the test split, the initial labelled set, the random
	// order and the selector's tie-breaking.
	Seed uint64
	// Initial is the size of the initial random labelled set; 0 means 50.
	Initial int
	// Batch is the number of items labelled per step; 0 means 50.
	Batch int
	// MaxLabels is the last budget; 0 means 1000.
	MaxLabels int
	// TestShare is the share of rows held apart as the test set (never
	// labelled, never picked); 0 means 0.3.
	TestShare float64
}

func (c CurveConfig) withDefaults() (CurveConfig, error) {
	if c.Learner == nil {
		c.Learner = learner.Logistic{Lambda: 0.1}
	}
	if c.Strategy == "" {
		c.Strategy = selector.Entropy
	}
	switch c.Strategy {
	case selector.Entropy, selector.Margin, selector.LeastConfidence, Random:
	default:
		return c, fmt.Errorf("curve strategy %q: want entropy, margin, least-confidence or random", c.Strategy)
	}
	if c.Initial == 0 {
		c.Initial = 50
	}
	if c.Batch == 0 {
		c.Batch = 50
	}
	if c.MaxLabels == 0 {
		c.MaxLabels = 1000
	}
	if c.TestShare == 0 {
		c.TestShare = 0.3
	}
	switch {
	case c.Initial < 2:
		return c, fmt.Errorf("curve: initial labelled set of %d items (want at least 2)", c.Initial)
	case c.Batch < 1:
		return c, fmt.Errorf("curve: batch of %d items (want at least 1)", c.Batch)
	case c.MaxLabels < c.Initial:
		return c, fmt.Errorf("curve: last budget %d is below the initial labelled set of %d", c.MaxLabels, c.Initial)
	case !(c.TestShare > 0 && c.TestShare < 1):
		return c, fmt.Errorf("curve: test share %v is not in (0, 1)", c.TestShare)
	}
	return c, nil
}

// LearningCurve simulates pool-based active learning on the rows of X whose
// true classes y (0 ≤ y[i] < k) stand in for the crowd (a perfect oracle),
// and returns the learning curve: one point per budget with the number of
// labelled rows and the test error 1 − accuracy (share of test rows whose
// most probable class, first on ties, differs from y).
//
// With n = X.Rows() and the seed's random permutation of the rows, the first
// round(TestShare·n) rows are the test set and the rest the pool, in
// permuted order; the first Initial pool rows are labelled. Then, while the
// labelled set is below MaxLabels, the learner is fitted on the labelled
// rows (one-hot targets, weights nil; classes without a labelled row are
// left out of the fit and get probability 0), the test error is recorded,
// and min(Batch, MaxLabels − labelled) pool rows are labelled: for Random
// the next rows of the pool order, otherwise the most uncertain ones by
// selector.Select (Plan.Unsure with the strategy; test rows are HeldOut and
// never picked). The last budget is recorded too. For one seed the test set
// and the initial set are the same for every strategy, so curves of
// different strategies are matched.
//
// len(y) != X.Rows() panics. Classes outside [0, k), a pool smaller than
// MaxLabels and an initial set of one class return an error.
func LearningCurve(X features.Matrix, y []int, k int, cfg CurveConfig) ([]verdict.CurvePoint, error) {
	n := X.Rows()
	if len(y) != n {
		panic(fmt.Sprintf("plan: LearningCurve with %d rows and %d classes", n, len(y)))
	}
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	if k < 2 {
		return nil, fmt.Errorf("curve: %d classes (want at least 2)", k)
	}
	for i, c := range y {
		if c < 0 || c >= k {
			return nil, fmt.Errorf("curve: row %d has class %d, outside [0, %d)", i, c, k)
		}
	}
	rng := rand.New(rand.NewPCG(cfg.Seed, 0xac71fe))
	perm := rng.Perm(n)
	nt := int(math.Round(cfg.TestShare * float64(n)))
	test, pool := perm[:nt], perm[nt:]
	if nt == 0 {
		return nil, fmt.Errorf("curve: a test share of %v of %d rows leaves no test rows", cfg.TestShare, n)
	}
	if len(pool) < cfg.MaxLabels {
		return nil, fmt.Errorf("curve: the pool has %d rows after the %d test rows, fewer than the last budget %d", len(pool), nt, cfg.MaxLabels)
	}
	state := make([]selector.State, n)
	for _, i := range test {
		state[i] = selector.HeldOut
	}
	labelled := append([]int(nil), pool[:cfg.Initial]...)
	for _, i := range labelled {
		state[i] = selector.Labelled
	}
	next := cfg.Initial // next row of the pool order, for Random

	var curve []verdict.CurvePoint
	proba := make([][]float64, n)
	for step := 0; ; step++ {
		m, present, err := fitOn(X, y, k, labelled, cfg.Learner)
		if err != nil {
			return nil, fmt.Errorf("curve, seed %d, %d labels: %w", cfg.Seed, len(labelled), err)
		}
		p := predictFull(m, present, k, X, test)
		wrong := 0
		for a, i := range test {
			if floats.MaxIdx(p[a*k:(a+1)*k]) != y[i] {
				wrong++
			}
		}
		curve = append(curve, verdict.CurvePoint{Labels: len(labelled), Error: float64(wrong) / float64(nt)})
		want := min(cfg.Batch, cfg.MaxLabels-len(labelled))
		if want <= 0 {
			return curve, nil
		}
		var picked []int
		if cfg.Strategy == Random {
			picked = pool[next : next+want]
			next += want
		} else {
			var cand []int
			for _, i := range pool {
				if state[i] == selector.Unlabelled {
					cand = append(cand, i)
				}
			}
			pc := predictFull(m, present, k, X, cand)
			clear(proba)
			for a, i := range cand {
				proba[i] = pc[a*k : (a+1)*k]
			}
			picks, err := selector.Select(selector.Pool{State: state, Proba: proba},
				selector.Plan{Unsure: want, Strategy: cfg.Strategy, Seed: cfg.Seed ^ uint64(step)<<32, NoRefill: true})
			if err != nil {
				return nil, fmt.Errorf("curve, seed %d, %d labels: %w", cfg.Seed, len(labelled), err)
			}
			for _, pk := range picks {
				picked = append(picked, pk.Item)
			}
			if len(picked) != want {
				return nil, fmt.Errorf("curve, seed %d: the selector picked %d items, want %d", cfg.Seed, len(picked), want)
			}
		}
		for _, i := range picked {
			state[i] = selector.Labelled
		}
		labelled = append(labelled, picked...)
	}
}

// fitOn fits l on the rows with one-hot targets over the classes present
// among them, and returns the model and those classes.
func fitOn(X features.Matrix, y []int, k int, rows []int, l learner.Learner) (learner.Model, []int, error) {
	at := make([]int, k)
	for c := range at {
		at[c] = -1
	}
	var present []int
	for _, i := range rows {
		if at[y[i]] < 0 {
			at[y[i]] = 0
			present = append(present, y[i])
		}
	}
	if len(present) < 2 {
		return nil, nil, fmt.Errorf("every labelled row has class %d; a classifier needs two classes (raise the initial labelled set)", y[rows[0]])
	}
	// Keep the codebook order of classes.
	present = present[:0]
	for c := range k {
		if at[c] == 0 {
			at[c] = len(present)
			present = append(present, c)
		}
	}
	targets := make([][]float64, len(rows))
	for j, i := range rows {
		t := make([]float64, len(present))
		t[at[y[i]]] = 1
		targets[j] = t
	}
	m, err := l.Fit(learner.Subset(X, rows), targets, nil)
	return m, present, err
}

// predictFull returns len(rows)×k probabilities, row-major, with 0 for the
// classes the model was not fitted on.
func predictFull(m learner.Model, present []int, k int, X features.Matrix, rows []int) []float64 {
	kp := len(present)
	pp := make([]float64, len(rows)*kp)
	if len(rows) > 0 {
		m.PredictProbaInto(pp, learner.Subset(X, rows))
	}
	out := make([]float64, len(rows)*k)
	for a := range rows {
		for b, c := range present {
			out[a*k+c] = pp[a*kp+b]
		}
	}
	return out
}

// Comparison is an uncertainty strategy against Random over several seeds.
type Comparison struct {
	// Seeds are the seeds run, one matched pair of curves each.
	Seeds []uint64 `json:"seeds"`
	// Uncertain and Random are the mean test error over the seeds at each
	// budget (Name: the strategy).
	Uncertain verdict.Series `json:"uncertain"`
	Random    verdict.Series `json:"random"`
	// UncertainSD and RandomSD are the standard deviations over the seeds
	// (n − 1 denominator; 0 for one seed), aligned with the points.
	UncertainSD []float64 `json:"uncertain_sd"`
	RandomSD    []float64 `json:"random_sd"`
	// Matched is the number of budgets compared: every budget above the
	// initial labelled set, where both curves share one model. (A budget
	// that labels the whole pool also gives both the same model; it is
	// compared, and cannot count as ahead.) Ahead is the number of matched
	// budgets at which the uncertain strategy's mean error is strictly
	// below Random's, and Share is Ahead / Matched.
	Matched int     `json:"matched"`
	Ahead   int     `json:"ahead"`
	Share   float64 `json:"share"`
}

// Text is the comparison as `loop curves` prints it: the mean test
// accuracy of both strategies at each budget and the share of budgets
// where the uncertain strategy is ahead.
func (c *Comparison) Text() string {
	var b strings.Builder
	fmt.Fprintf(&b, "test accuracy, mean over %d seeds (consensus as the oracle)\n%8s  %8s  %8s\n", len(c.Seeds), "labels", c.Uncertain.Name, "random")
	for i, p := range c.Uncertain.Points {
		fmt.Fprintf(&b, "%8d  %8.3f  %8.3f\n", p.Labels, 1-p.Error, 1-c.Random.Points[i].Error)
	}
	fmt.Fprintf(&b, "%s ahead of random at %d of %d budgets (%.0f%%)\n", c.Uncertain.Name, c.Ahead, c.Matched, 100*c.Share)
	return b.String()
}

// InReport returns a copy of a verdict report whose learning-curve plot
// shows the comparison instead: the uncertain strategy's curve solid, the
// random one dashed, and in place of the fitted curve a note that both
// are simulated.
func (c *Comparison) InReport(rep *verdict.Report) *verdict.Report {
	r := *rep
	r.Curve = c.Uncertain.Points
	r.Compare = &verdict.Series{Name: "random (simulated)", Points: c.Random.Points}
	r.Fit = nil
	r.FitError = fmt.Sprintf("Simulated by loop curves on the %d seeds %v: the solid curve is %s selection, "+
		"the dashed one random selection, each the mean test error over the seeds with the consensus as the oracle. "+
		"%s is ahead at %d of %d budgets (%.0f%%).", len(c.Seeds), c.Seeds, c.Uncertain.Name, strings.ToUpper(c.Uncertain.Name[:1])+c.Uncertain.Name[1:], c.Ahead, c.Matched, 100*c.Share)
	return &r
}

// CompareStrategies runs LearningCurve for cfg.Strategy ("" means Entropy)
// and for Random with each seed (cfg.Seed is replaced by it) and averages
// the curves over the seeds, budget by budget: mean error ē(n) = Σ_s e_s(n)
// / S with its standard deviation. It needs at least one seed, and a
// strategy other than Random.
func CompareStrategies(X features.Matrix, y []int, k int, cfg CurveConfig, seeds []uint64) (*Comparison, error) {
	if len(seeds) == 0 {
		return nil, fmt.Errorf("curve comparison: no seeds")
	}
	if cfg.Strategy == "" {
		cfg.Strategy = selector.Entropy
	}
	if cfg.Strategy == Random {
		return nil, fmt.Errorf("curve comparison: the strategy compared with random must be an uncertainty strategy")
	}
	c := &Comparison{Seeds: append([]uint64(nil), seeds...)}
	// The 2·S runs are independent and each is deterministic, so they run
	// on GOMAXPROCS goroutines without changing the result.
	runs := [2][][]verdict.CurvePoint{make([][]verdict.CurvePoint, len(seeds)), make([][]verdict.CurvePoint, len(seeds))}
	errs := make([]error, 2*len(seeds))
	jobs := make(chan int)
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), 2*len(seeds)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for r := range jobs {
				cc := cfg
				cc.Seed, cc.Strategy = seeds[r/2], []selector.Strategy{cfg.Strategy, Random}[r%2]
				runs[r%2][r/2], errs[r] = LearningCurve(X, y, k, cc)
			}
		}()
	}
	for r := range errs {
		jobs <- r
	}
	close(jobs)
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	initial := runs[0][0][0].Labels
	mean := func(rs [][]verdict.CurvePoint, name string) (verdict.Series, []float64) {
		out := verdict.Series{Name: name, Points: make([]verdict.CurvePoint, len(rs[0]))}
		sd := make([]float64, len(rs[0]))
		for b := range out.Points {
			var sum, sq float64
			for _, r := range rs {
				sum += r[b].Error
			}
			m := sum / float64(len(rs))
			for _, r := range rs {
				sq += (r[b].Error - m) * (r[b].Error - m)
			}
			out.Points[b] = verdict.CurvePoint{Labels: rs[0][b].Labels, Error: m}
			if len(rs) > 1 {
				sd[b] = math.Sqrt(sq / float64(len(rs)-1))
			}
		}
		return out, sd
	}
	c.Uncertain, c.UncertainSD = mean(runs[0], string(cfg.Strategy))
	c.Random, c.RandomSD = mean(runs[1], string(Random))
	for b, p := range c.Uncertain.Points {
		if p.Labels <= initial {
			continue
		}
		c.Matched++
		if p.Error < c.Random.Points[b].Error {
			c.Ahead++
		}
	}
	if c.Matched > 0 {
		c.Share = float64(c.Ahead) / float64(c.Matched)
	}
	return c, nil
}

// ProjectCurveConfig configures ProjectCurves. Zero values are defaults.
type ProjectCurveConfig struct {
	// Curve sets the simulation; its Seed and Strategy are ignored (see
	// Seeds; the strategy is Entropy against Random). Learner nil means the
	// learner round.Train would fit (Train.Learner, Lambda, Trees, Seed).
	// MaxLabels 0 means min(1000, ¾ of the pool rows); Initial 0 means
	// min(50, MaxLabels/5); Batch 0 means 50 when at least 500 labels
	// follow the initial set, else a tenth of them (at least 1).
	Curve CurveConfig
	// Train chooses the kind of items, the features and the learner, as
	// for round.Train.
	Train round.TrainConfig
	// Seeds are the seeds averaged over; nil means 1, 2, 3, 4, 5.
	Seeds []uint64
}

// ProjectCurves compares entropy selection with random selection on the
// project's own items by simulation (CompareStrategies): the oracle is the
// stored consensus (round.Labelled: each item of the chosen kind with crowd
// labels gets its most probable consensus class, a gold item its expert
// class) and the features are fitted, without labels, on those items as
// round.Train would. The figures show what entropy selection gains over
// random on data like the project's; they are not held-out agreement. The
// crowd-labelled items may themselves have been picked by selection, so
// they need not be a random sample of the archive.
//
// It needs a stored consensus (run round.Consensus first) and enough
// labelled items for a test set and a few batches; otherwise it returns an
// error saying so.
func ProjectCurves(st *store.Store, cfg ProjectCurveConfig) (*Comparison, error) {
	set, err := round.Labelled(st, cfg.Train)
	if err != nil {
		return nil, err
	}
	cc, err := cfg.Curve.withDefaultsFor(len(set.Y))
	if err != nil {
		return nil, err
	}
	if cc.Learner == nil {
		cc.Learner = set.Learner
	}
	X, err := set.Features()
	if err != nil {
		return nil, err
	}
	seeds := cfg.Seeds
	if seeds == nil {
		seeds = []uint64{1, 2, 3, 4, 5}
	}
	cc.Strategy = selector.Entropy
	return CompareStrategies(X, set.Y, set.K, cc, seeds)
}

// withDefaultsFor fills ProjectCurveConfig's size defaults for n labelled
// rows.
func (c CurveConfig) withDefaultsFor(n int) (CurveConfig, error) {
	share := c.TestShare
	if share == 0 {
		share = 0.3
	}
	pool := n - int(math.Round(share*float64(n)))
	if pool < 30 || n-pool < 10 {
		return c, fmt.Errorf("curves: %d labelled items with a consensus; need at least 45 (run `loop consensus` after more labels)", n)
	}
	if c.MaxLabels == 0 {
		// Three quarters of the pool at most: once the whole pool is
		// labelled both strategies train on the same rows.
		c.MaxLabels = min(1000, pool*3/4)
	}
	if c.Initial == 0 {
		c.Initial = min(50, max(10, c.MaxLabels/5))
	}
	if c.Batch == 0 {
		if rest := c.MaxLabels - c.Initial; rest >= 500 {
			c.Batch = 50
		} else {
			c.Batch = max(1, rest/10)
		}
	}
	return c, nil
}
