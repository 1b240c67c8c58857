// Package verdict computes the handoff report on the held-out set: the
// machine's agreement with the reference (per-class exact intervals,
// bootstrap intervals for the summary figures), the crowd ceiling and the
// median-annotator gate, the coverage–risk curve with an exact error bound and
// the autolabel threshold chosen by fixed-sequence testing, with the bound's
// α spent across repeated looks, a bound against the truth where gold exists,
// calibration, the stop rule, the learning curve, the post-handoff audit,
// and the decision: GO or NOT YET, with the gates that held it back. It
// renders the report as text, JSON and one self-contained HTML file with
// inline SVG plots.
//
// The package takes plain Go values (probabilities, class indices, kappas,
// counts) and returns plain values. Everything random is seeded.
//
// # Repeated looks
//
// A team runs a round, reads the verdict, labels more and runs another
// round, until the first GO. Every verdict is a look at (largely) the same
// held-out set, so a bound that holds for one look does not hold for the
// first GO among many. The verdict therefore spends α = 1 − confidence
// across looks: look r (r = 1, 2, …, counting only rounds with new labels)
// tests at level 1 − α_r with
//
//	α_r = α / (r(r+1)),   Σ_{r≥1} α_r = α  (1/(r(r+1)) = 1/r − 1/(r+1)).
//
// By the union (Bonferroni) bound, the chance that any look's GO bound is
// wrong is at most Σ α_r = α, whatever the dependence between looks — which
// is strong here, since the held-out set is reused. Among the rules that sum
// to α, α·2^−r spends most of α on the first looks, where a GO is unlikely,
// and leaves α·2^−10 ≈ 5·10⁻⁵ for look 10; α/(r(r+1)) leaves 4.5·10⁻⁴ there
// (and α·6/(π²r²) 3.0·10⁻⁴), so it needs the fewest held-out items at the
// looks where a GO is plausible. bench/verdict measures the three.
//
// # JSON
//
// Report.WriteJSON writes the Report struct; its field names (the json tags)
// are stable. Top level: "decision" (go, reasons, notes, gates, held_by,
// threshold, coverages, bound, labels_needed), "agreement" (n, level,
// bootstrap, accuracy, kappa, macro_f1 as {est, lo, hi}; classes with
// precision and recall as exact intervals or null; confusion counts
// [reference][machine] and cells as shares with exact intervals), "ceiling"
// (annotators, kappa median and quartiles, machine kappa, median and machine
// agreement, at_least_median), "coverage_risk" (points), "threshold" (the
// chosen one and where the walk stopped), "standard" (the reference
// standard's counts), "truth" (the bound against the truth where gold
// exists), "calibration", "stop", "curve" and "compare" (learning curves),
// "fit" (the learning-curve estimate, null when none), "audit", "stored"
// (the model of the stored machine labels), "run" (the round's settings) and
// "settings" (the verdict's). Absent parts are null.
//
// Size: about 2,600 lines, half of them the report's text, JSON and HTML
// forms with their plots; the statistics themselves (stats.go, risk.go,
// parts.go, curve.go) are small functions, each checked against a published
// value.
package verdict

import (
	"fmt"
	"math"
	"strings"

	"handoff/compare"
)

// Input is everything the verdict needs, as plain values.
type Input struct {
	// Classes are the codebook's class keys; class indices refer to them.
	Classes []string
	// Truth is the reference class of each held-out item that meets the
	// reference standard (its consensus, or its gold answer).
	Truth []int
	// Proba is the machine's probability vector for each of those items
	// (len(Classes) entries each). The machine's class is its argmax
	// (first on ties) and its confidence the largest entry.
	Proba [][]float64
	// Unsettled holds the machine's probability vectors for the held-out
	// items that count (see Standard) but whose consensus does not meet the
	// reference standard. They count as disagreements in the error bound
	// wherever a threshold covers them (so that hard items cannot drop out
	// of the count while they wait for labels) and nowhere else.
	Unsettled [][]float64
	// Standard describes the reference standard and the held-out set
	// (nil: not stated).
	Standard *Standard
	// Archive holds the machine's confidence for each archive item
	// without crowd labels or gold — machine-labelled ones included — for
	// the expected coverage (nil: unknown).
	Archive []float64
	// Annotators are the crowd's figures against the leave-one-out
	// consensus (nil: no crowd ceiling and no median-annotator gate).
	Annotators []Annotator
	// StopSet[r] holds the predicted classes on the fixed stop set after
	// round r, oldest first, rounds with new labels only (nil: no stop rule).
	StopSet [][]int
	// Curve is this project's learning curve: labels spent and the error on
	// one fixed evaluation set, one point per round with new labels.
	Curve []CurvePoint
	// Compare is an optional second curve (e.g. random selection).
	Compare *Series
	// Audit, if not nil, is the post-handoff audit: items checked and
	// machine labels people disagreed with.
	Audit *AuditCounts
	// Look is which look at the data this verdict is (see the package
	// comment); 0 means 1.
	Look int
	// Gold, if not nil, is the consensus's own error on gold items: the
	// crowd consensus computed without the gold answers, on the gold items
	// that meet the reference standard.
	Gold *GoldCounts
	// LabelCap is the most labels a learning-curve estimate may name (the
	// archive's items times the labels per item); 0 means no cap.
	LabelCap int
	// Stored describes the machine labels already in the project (nil:
	// none).
	Stored *StoredLabels
	// Run lists the settings of the run that produced this input, printed
	// with the report.
	Run []Setting
}

// Standard describes the reference standard of the held-out set: an item
// meets it when it is gold, or when its consensus posterior reaches Level,
// or once it has Cap labels. A labelled item counts from the Lag-th round
// after the one that first saw it labelled, met or not.
type Standard struct {
	Level float64 `json:"level"`
	Cap   int     `json:"cap"`
	Lag   int     `json:"lag"`
	// Members is the size of the held-out set (a random sample of Share
	// of the archive). Of them, Met count and meet the standard, Below
	// count but do not meet it (they count as disagreements wherever
	// covered), Pending are labelled too recently to count, Waiting have
	// no labels yet.
	Members int     `json:"members"`
	Share   float64 `json:"share"`
	Met     int     `json:"met"`
	Below   int     `json:"below"`
	Pending int     `json:"pending"`
	Waiting int     `json:"waiting"`
}

// GoldCounts are the consensus's errors on gold items.
type GoldCounts struct {
	Items  int `json:"items"`
	Errors int `json:"errors"`
}

// StoredLabels names the model that wrote the project's machine labels.
type StoredLabels struct {
	Model  string `json:"model"`
	Round  int    `json:"round"`
	Items  int    `json:"items"`
	Latest string `json:"latest"` // the latest model, for comparison
}

// Setting is one setting of a run, with where its value came from
// ("stored", "default" or "flag").
type Setting struct {
	Key    string `json:"key"`
	Value  string `json:"value"`
	Source string `json:"source"`
}

// AuditCounts are the raw audit results.
type AuditCounts struct {
	Items  int `json:"items"`
	Errors int `json:"errors"`
}

// Options are the verdict's settings. Zero values are defaults.
type Options struct {
	MaxError   float64 // largest acceptable disagreement among autolabelled items; 0 means 0.05
	Confidence float64 // overall level of the error bound across all looks, and of the audit interval; 0 means 0.95
	Level      float64 // level of the bootstrap and per-class intervals; 0 means 0.95
	Bootstrap  int     // bootstrap resamples B; 0 means 1000
	Seed       uint64  // seed of the bootstrap
	MinCount   int     // fewest held-out items a tested threshold covers; 0 means MinCountFor at the look's level
	Bins       int     // calibration bins; 0 means 15
	StopKappa  float64 // stop rule threshold; 0 means 0.99
	StopWindow int     // stop rule window; 0 means 3
	// TargetError is the overall error on the evaluation set the
	// learning-curve estimate aims for; 0 means MaxError (the machine could
	// then take the whole archive).
	TargetError float64
	// NoMedianGate lets GO pass with the machine below the median
	// annotator (the gate is on by default). RequireStable makes GO also
	// require the stop rule.
	NoMedianGate, RequireStable bool
}

// Settings records the options actually used.
type Settings struct {
	MaxError   float64 `json:"max_error"`
	Confidence float64 `json:"confidence"`
	// Alpha is 1 − Confidence, spent across looks; Look is this look and
	// LookAlpha its share α_r (see LookAlpha); Spending names the rule.
	Alpha         float64 `json:"alpha"`
	Look          int     `json:"look"`
	LookAlpha     float64 `json:"look_alpha"`
	Spending      string  `json:"spending"`
	Level         float64 `json:"level"`
	Bootstrap     int     `json:"bootstrap"`
	Seed          uint64  `json:"seed"`
	MinCount      int     `json:"min_count"`
	Bins          int     `json:"bins"`
	StopKappa     float64 `json:"stop_kappa"`
	StopWindow    int     `json:"stop_window"`
	TargetError   float64 `json:"target_error"`
	MedianGate    bool    `json:"median_gate"`
	RequireStable bool    `json:"require_stable"`
}

// Spending names the rule by which the verdict spends α across looks.
const Spending = "α_r = α/(r(r+1))"

// LookAlpha returns α_r = α/(r(r+1)), the share of α spent at look r ≥ 1;
// the shares sum to α over all looks (see the package comment). r < 1
// panics.
func LookAlpha(alpha float64, r int) float64 {
	if r < 1 {
		panic(fmt.Sprintf("verdict: look %d (looks count from 1)", r))
	}
	return alpha / (float64(r) * float64(r+1))
}

// Gate is one requirement of GO.
type Gate struct {
	Name     string `json:"name"`
	Passed   bool   `json:"passed"`
	Required bool   `json:"required"`
	Detail   string `json:"detail"`
}

// The gates, by name.
const (
	GateBound    = "error bound"
	GateMedian   = "median annotator"
	GateStable   = "stop rule"
	GateAudit    = "audit"
	GateStandard = "reference standard"
)

// Decision is GO or NOT YET, with what supports it.
type Decision struct {
	Go bool `json:"go"`
	// Threshold, the coverages and Bound describe the autolabel threshold
	// when one passed (also reported under NOT YET when other gates failed).
	Threshold       float64 `json:"threshold"`
	HeldOutCoverage float64 `json:"held_out_coverage"`
	ArchiveCoverage float64 `json:"archive_coverage"`
	Bound           float64 `json:"bound"`
	// Gates are the requirements checked; HeldBy names the required ones
	// that failed (empty for GO).
	Gates  []Gate   `json:"gates"`
	HeldBy []string `json:"held_by"`
	// Reasons says why NOT YET (empty for GO).
	Reasons []string `json:"reasons"`
	// Notes are warnings that do not change the decision.
	Notes []string `json:"notes"`
	// LabelsNeeded estimates the further labels before the learning curve
	// reaches the target error: −1 when there is no estimate.
	LabelsNeeded int `json:"labels_needed"`
}

// TruthBound bounds the machine's error against the truth on the items it
// would autolabel, where gold exists: by the triangle inequality, P(machine ≠
// truth) ≤ P(machine ≠ reference) + P(reference ≠ truth). Disagreement is
// the one-sided Clopper–Pearson bound on the first at the chosen threshold,
// ConsensusError the one on the second measured on gold items, each at level
// 1 − α_r/2, so that both hold together with probability ≥ 1 − α_r. The
// second assumes the consensus errs on the gold items as often as on the
// autolabelled ones.
type TruthBound struct {
	Disagreement   float64 `json:"disagreement"`
	ConsensusError float64 `json:"consensus_error"`
	Total          float64 `json:"total"`
	GoldItems      int     `json:"gold_items"`
	GoldErrors     int     `json:"gold_errors"`
	Rate           float64 `json:"rate"` // observed consensus error on gold
	Lo             float64 `json:"lo"`   // two-sided Clopper–Pearson interval at Level
	Hi             float64 `json:"hi"`
	Level          float64 `json:"level"` // 1 − α_r/2, the level of each bound
}

// Report is the whole verdict.
type Report struct {
	Classes      []string      `json:"classes"`
	Decision     Decision      `json:"decision"`
	Agreement    Agreement     `json:"agreement"`
	Ceiling      *Ceiling      `json:"ceiling"`
	CoverageRisk []RiskPoint   `json:"coverage_risk"`
	Threshold    Threshold     `json:"threshold"`
	Standard     *Standard     `json:"standard"`
	Truth        *TruthBound   `json:"truth"`
	Calibration  Calibration   `json:"calibration"`
	Stop         *StopRule     `json:"stop"`
	Curve        []CurvePoint  `json:"curve"`
	Compare      *Series       `json:"compare"`
	Fit          *PowerLaw     `json:"fit"`
	FitError     string        `json:"fit_error,omitempty"`
	Audit        *Audit        `json:"audit"`
	Stored       *StoredLabels `json:"stored"`
	Run          []Setting     `json:"run"`
	Settings     Settings      `json:"settings"`
	// ArchiveItems is the number of archive confidences given.
	ArchiveItems int `json:"archive_items"`
	// Codings are the crowd's, the machine's and the waves' comparisons
	// with independent codings (see package compare), attached when the
	// report is shown; nil when the project has none. They never enter
	// the decision.
	Codings *compare.Report `json:"codings,omitempty"`
	// Questions are every question of a question tree (this report's
	// detail is the first's), attached when the report is shown; nil for a
	// one-question project. They never enter the decision.
	Questions []QuestionSummary `json:"questions,omitempty"`
}

// WithAudit returns a copy of the report with the audit replaced by a (nil
// for none) and the decision taken again: the audit gate is the only one
// it can change.
func (r *Report) WithAudit(a *AuditCounts) (*Report, error) {
	c := *r
	c.Audit = nil
	if a != nil {
		au, err := AuditError(a.Errors, a.Items, r.Settings.Confidence)
		if err != nil {
			return nil, err
		}
		c.Audit = &au
	}
	c.Decision = decide(&c, c.ArchiveItems)
	return &c, nil
}

func (o Options) settings(look int) (Settings, error) {
	s := Settings{MaxError: o.MaxError, Confidence: o.Confidence, Level: o.Level, Bootstrap: o.Bootstrap,
		Seed: o.Seed, MinCount: o.MinCount, Bins: o.Bins, StopKappa: o.StopKappa, StopWindow: o.StopWindow,
		TargetError: o.TargetError, MedianGate: !o.NoMedianGate, RequireStable: o.RequireStable, Spending: Spending}
	def := func(v *float64, d float64) {
		if *v == 0 {
			*v = d
		}
	}
	def(&s.MaxError, 0.05)
	def(&s.Confidence, 0.95)
	def(&s.Level, 0.95)
	def(&s.StopKappa, 0.99)
	def(&s.TargetError, s.MaxError)
	if s.Bootstrap <= 0 {
		s.Bootstrap = 1000
	}
	if s.Bins <= 0 {
		s.Bins = 15
	}
	if s.StopWindow <= 0 {
		s.StopWindow = 3
	}
	for _, f := range []struct {
		name string
		v    float64
	}{{"max-error", s.MaxError}, {"confidence", s.Confidence}, {"level", s.Level}, {"target error", s.TargetError}} {
		if !(f.v > 0 && f.v < 1) {
			return s, fmt.Errorf("%s: %v is not in (0, 1)", f.name, f.v)
		}
	}
	if !(s.StopKappa > -1 && s.StopKappa <= 1) {
		return s, fmt.Errorf("stop kappa: %v is not in (−1, 1]", s.StopKappa)
	}
	if look < 0 {
		return s, fmt.Errorf("look %d: looks count from 1", look)
	}
	s.Look = max(look, 1)
	s.Alpha = 1 - s.Confidence
	s.LookAlpha = LookAlpha(s.Alpha, s.Look)
	if s.MinCount <= 0 {
		s.MinCount = MinCountFor(s.MaxError, 1-s.LookAlpha)
	}
	return s, nil
}

// Compute builds the report from in. Slices of mismatched length panic;
// invalid values (probabilities that are not probability vectors, classes
// outside the codebook, kappas outside [−1, 1], bad options) return an error
// naming the item or option.
func Compute(in Input, opt Options) (*Report, error) {
	s, err := opt.settings(in.Look)
	if err != nil {
		return nil, err
	}
	k := len(in.Classes)
	if k < 2 {
		return nil, fmt.Errorf("classes: need at least two, have %d", k)
	}
	if len(in.Truth) != len(in.Proba) {
		panic(fmt.Sprintf("verdict: %d reference classes and %d probability vectors", len(in.Truth), len(in.Proba)))
	}
	n := len(in.Truth)
	pred := make([]int, n)
	conf := make([]float64, n)
	right := make([]bool, n)
	check := func(what string, i int, p []float64) (int, float64, error) {
		if len(p) != k {
			return 0, 0, fmt.Errorf("%s %d: %d probabilities for %d classes", what, i, len(p), k)
		}
		sum, b := 0.0, 0
		for j, v := range p {
			if math.IsNaN(v) || v < -1e-9 || v > 1+1e-9 {
				return 0, 0, fmt.Errorf("%s %d: probability of class %q is %v", what, i, in.Classes[j], v)
			}
			sum += v
			if v > p[b] {
				b = j
			}
		}
		if math.Abs(sum-1) > 1e-6 {
			return 0, 0, fmt.Errorf("%s %d: probabilities sum to %v, not 1", what, i, sum)
		}
		return b, math.Min(1, math.Max(0, p[b])), nil
	}
	for i, p := range in.Proba {
		if pred[i], conf[i], err = check("held-out item", i, p); err != nil {
			return nil, err
		}
		if in.Truth[i] < 0 || in.Truth[i] >= k {
			return nil, fmt.Errorf("held-out item %d: reference class %d outside the %d classes", i, in.Truth[i], k)
		}
		right[i] = pred[i] == in.Truth[i]
	}
	// The bound's outcomes: settled items as they are, unsettled ones as
	// disagreements.
	bconf := append([]float64(nil), conf...)
	bwrong := make([]bool, n, n+len(in.Unsettled))
	for i := range bwrong {
		bwrong[i] = !right[i]
	}
	unsettled := make([]float64, len(in.Unsettled))
	for i, p := range in.Unsettled {
		_, c, err := check("unsettled held-out item", i, p)
		if err != nil {
			return nil, err
		}
		unsettled[i] = c
		bconf = append(bconf, c)
		bwrong = append(bwrong, true)
	}
	r := &Report{Classes: in.Classes, Settings: s, Curve: in.Curve, Compare: in.Compare, Standard: in.Standard, Stored: in.Stored, Run: in.Run}
	if n > 0 {
		if r.Agreement, err = Agree(in.Truth, pred, in.Classes, s.Bootstrap, s.Level, s.Seed); err != nil {
			return nil, err
		}
	} else {
		r.Agreement = Agreement{Level: s.Level, B: s.Bootstrap}
	}
	if len(bconf) > 0 {
		if r.CoverageRisk, r.Threshold, err = CoverageRisk(bconf, bwrong, in.Archive, s.MaxError, 1-s.LookAlpha, s.MinCount); err != nil {
			return nil, err
		}
	} else {
		r.Threshold = Threshold{MaxError: s.MaxError, Level: 1 - s.LookAlpha, MinCount: s.MinCount,
			Stop: "the held-out set has no labelled items yet"}
	}
	if th := &r.Threshold; th.Found {
		for _, c := range unsettled {
			if c >= th.Threshold {
				th.Unsettled++
			}
		}
	}
	if in.Annotators != nil && n > 0 {
		// The machine's agreement with the reference on the items it would
		// autolabel: the settled held-out items at the chosen threshold (all
		// of them when none passed).
		cut := math.Inf(-1)
		if r.Threshold.Found {
			cut = r.Threshold.Threshold
		}
		m, agree := 0, 0
		for i := range conf {
			if conf[i] >= cut {
				m++
				if right[i] {
					agree++
				}
			}
		}
		ma := 0.0
		if m > 0 {
			ma = float64(agree) / float64(m)
		}
		c, err := CrowdCeiling(in.Annotators, r.Agreement.Kappa.Est, ma, m)
		if err != nil {
			return nil, err
		}
		r.Ceiling = &c
	}
	if in.Gold != nil && in.Gold.Items > 0 && r.Threshold.Found {
		g := in.Gold
		if g.Errors < 0 || g.Errors > g.Items {
			return nil, fmt.Errorf("gold: %d consensus errors in %d items", g.Errors, g.Items)
		}
		lv := 1 - s.LookAlpha/2
		th := r.Threshold
		tb := &TruthBound{GoldItems: g.Items, GoldErrors: g.Errors, Rate: float64(g.Errors) / float64(g.Items), Level: lv,
			Disagreement: UpperBound(th.Errors, th.N, lv), ConsensusError: UpperBound(g.Errors, g.Items, lv)}
		tb.Total = math.Min(1, tb.Disagreement+tb.ConsensusError)
		tb.Lo, tb.Hi = ClopperPearson(g.Errors, g.Items, s.Level)
		r.Truth = tb
	}
	if n > 0 {
		if r.Calibration, err = Calibrate(conf, right, s.Bins); err != nil {
			return nil, err
		}
	}
	if in.StopSet != nil {
		for ri, row := range in.StopSet {
			for i, c := range row {
				if c < 0 || c >= k {
					return nil, fmt.Errorf("stop set round %d item %d: class %d outside the %d classes", ri, i, c, k)
				}
			}
		}
		st := Stability(in.StopSet, k, s.StopKappa, s.StopWindow)
		r.Stop = &st
	}
	if len(in.Curve) > 0 {
		f, err := FitCurve(in.Curve, CurveOptions{Target: s.TargetError, Cap: in.LabelCap, Level: s.Level, Seed: s.Seed})
		if err != nil {
			r.FitError = err.Error()
		} else {
			r.Fit = &f
		}
	}
	if in.Audit != nil {
		a, err := AuditError(in.Audit.Errors, in.Audit.Items, s.Confidence)
		if err != nil {
			return nil, err
		}
		r.Audit = &a
	}
	r.ArchiveItems = len(in.Archive)
	r.Decision = decide(r, len(in.Archive))
	return r, nil
}

func decide(r *Report, archive int) Decision {
	s := r.Settings
	d := Decision{LabelsNeeded: -1, Reasons: []string{}, Notes: []string{}, Gates: []Gate{}, HeldBy: []string{}}
	gate := func(name string, passed, required bool, detail string) {
		d.Gates = append(d.Gates, Gate{Name: name, Passed: passed, Required: required, Detail: detail})
		switch {
		case !passed && required:
			d.HeldBy = append(d.HeldBy, name)
			d.Reasons = append(d.Reasons, name+": "+detail)
		case !passed:
			d.Notes = append(d.Notes, name+" (not required): "+detail)
		}
	}
	th := r.Threshold
	switch {
	case r.Agreement.N == 0:
		// Nothing to test yet: the other gates would only repeat it.
		gate(GateStandard, false, true, "no held-out item counts yet: label the held-out items (`loop next` asks for them) and run more rounds")
	case th.Found:
		d.Threshold, d.HeldOutCoverage, d.ArchiveCoverage, d.Bound = th.Threshold, th.Coverage, th.Archive, th.Upper
		gate(GateBound, true, true, fmt.Sprintf("threshold %.4g covers %d held-out items with %d disagreements; upper bound %s ≤ max-error %s at look %d (α_%d = %.3g)",
			th.Threshold, th.N, th.Errors, pct(th.Upper), pct(s.MaxError), s.Look, s.Look, s.LookAlpha))
	default:
		gate(GateBound, false, true, fmt.Sprintf("no confidence threshold keeps the bound within max-error %s at look %d (α_%d = %.3g): %s",
			pct(s.MaxError), s.Look, s.Look, s.LookAlpha, th.Stop))
	}
	if c := r.Ceiling; c != nil {
		gate(GateMedian, c.AtLeastMedian, s.MedianGate, fmt.Sprintf("the machine agrees with the reference on %s of the %d held-out items it would autolabel; the median annotator agrees with the others on %s of their items",
			pct(c.MachineAgreement), c.MachineItems, pct(c.MedianAgreement)))
	} else if s.MedianGate && r.Agreement.N > 0 {
		gate(GateMedian, false, true, "no annotator figures were given, so the machine cannot be compared with the median annotator")
	}
	stable := r.Stop != nil && r.Stop.Stable
	msg := "predictions on the stop set are stable"
	switch {
	case r.Stop == nil:
		msg = "no stop-set predictions were given, so the stop rule was not applied"
	case !stable:
		msg = fmt.Sprintf("predictions on the stop set have not yet stabilised (kappa ≥ %.2f for %d rounds with new labels in a row)", r.Stop.Threshold, r.Stop.Window)
	}
	if s.RequireStable || !stable {
		gate(GateStable, stable, s.RequireStable, msg)
	}
	if r.Audit != nil {
		ok := r.Audit.Lo <= s.MaxError
		gate(GateAudit, ok, true, fmt.Sprintf("the audit found %d errors in %d machine labels: error %.3f, interval [%.3f, %.3f] against max-error %.3g",
			r.Audit.Errors, r.Audit.N, r.Audit.Rate, r.Audit.Lo, r.Audit.Hi, s.MaxError))
	}
	if st := r.Standard; st != nil && (st.Below > 0 || st.Pending > 0 || st.Waiting > 0) {
		d.Notes = append(d.Notes, fmt.Sprintf("reference standard: %d held-out items count and meet it, %d count but do not yet (as disagreements where covered), %d were labelled too recently to count, %d have no labels yet",
			st.Met, st.Below, st.Pending, st.Waiting))
	}
	if th.Found && th.Archive == 0 && archive > 0 {
		d.Notes = append(d.Notes, "no archive item reaches the threshold: the expected archive coverage is 0")
	}
	if sl := r.Stored; sl != nil && sl.Latest != "" && sl.Model != sl.Latest {
		d.Notes = append(d.Notes, fmt.Sprintf("the %d machine labels in the project were written by model %s (round %d), not the latest %s: run `loop autolabel` again to relabel with it",
			sl.Items, sl.Model, sl.Round, sl.Latest))
	}
	if r.Fit != nil {
		d.LabelsNeeded = r.Fit.More
	} else if r.FitError != "" {
		note := r.FitError
		if !strings.HasPrefix(note, "learning curve") {
			note = "learning curve: " + note
		}
		d.Notes = append(d.Notes, note)
	}
	d.Go = len(d.HeldBy) == 0
	return d
}

// heldBy lists the gates that held a NOT YET back, for the headline.
func (d Decision) heldBy() string { return strings.Join(d.HeldBy, ", ") }
