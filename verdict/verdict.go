// Package verdict computes the handoff report on the held-out set: the
// machine's agreement with the consensus (with bootstrap intervals), the
// crowd ceiling, the coverage–risk curve with an exact error bound and the
// autolabel threshold chosen by fixed-sequence testing, calibration, the
// stop rule, the learning curve with an inverse-power-law fit, the post-
// handoff audit, and the decision: GO or NOT YET. It renders the report as
// text, JSON and one self-contained HTML file with inline SVG plots.
//
// The package takes plain Go values (probabilities, class indices, kappas,
// counts) and returns plain values. Everything random is seeded.
//
// # JSON
//
// Report.WriteJSON writes the Report struct; its field names (the json tags)
// are stable. Top level: "decision" (go, reasons, threshold, archive
// coverage, bound, labels_needed), "agreement" (n, level, bootstrap, accuracy,
// kappa, macro_f1 as {est, lo, hi}; classes with precision and recall;
// confusion counts [consensus][machine] and cells as shares with intervals),
// "ceiling" (annotators, median, q1, q3, machine_kappa, at_least_median),
// "coverage_risk" (points: threshold, n, errors, coverage, risk, upper,
// archive, tested, passed), "threshold" (the chosen one and where the walk
// stopped), "calibration" (ece, bins), "stop" (kappas, threshold, window,
// stable), "curve" and "compare" (learning curves), "fit" (a, b, c, sse,
// target, reachable, labels_at, more), "audit" (n, errors, rate, lo, hi,
// level) and "settings". Absent parts are null.
package verdict

import (
	"fmt"
	"math"
)

// Input is everything the verdict needs, as plain values.
type Input struct {
	// Classes are the codebook's class keys; class indices refer to them.
	Classes []string
	// Truth is the consensus class of each held-out item.
	Truth []int
	// Proba is the machine's probability vector for each held-out item
	// (len(Classes) entries each). The machine's class is its argmax
	// (first on ties) and its confidence the largest entry.
	Proba [][]float64
	// Archive holds the machine's confidence for each unlabelled archive
	// item, for the expected coverage (nil: unknown).
	Archive []float64
	// Annotators are the crowd's kappas against the leave-one-out
	// consensus (nil: no crowd ceiling).
	Annotators []Annotator
	// StopSet[r] holds the predicted classes on the fixed stop set after
	// round r, oldest first (nil: no stop rule).
	StopSet [][]int
	// Curve is this project's learning curve, one point per round.
	Curve []CurvePoint
	// Compare is an optional second curve (e.g. random selection).
	Compare *Series
	// Audit, if not nil, is the post-handoff audit: items checked and
	// machine labels people disagreed with.
	Audit *AuditCounts
}

// AuditCounts are the raw audit results.
type AuditCounts struct {
	Items  int `json:"items"`
	Errors int `json:"errors"`
}

// Options are the verdict's settings. Zero values are defaults.
type Options struct {
	MaxError   float64 // largest acceptable disagreement among autolabelled items; 0 means 0.05
	Confidence float64 // level of the error bound and of the audit interval; 0 means 0.95
	Level      float64 // level of the bootstrap intervals; 0 means 0.95
	Bootstrap  int     // bootstrap resamples B; 0 means 1000
	Seed       uint64  // seed of the bootstrap
	MinCount   int     // fewest held-out items a tested threshold covers; 0 means MinCountFor
	Bins       int     // calibration bins; 0 means 15
	StopKappa  float64 // stop rule threshold; 0 means 0.99
	StopWindow int     // stop rule window; 0 means 3
	// TargetError is the overall held-out error the learning-curve
	// estimate aims for; 0 means MaxError (the machine could then take the
	// whole archive).
	TargetError float64
	// RequireCeiling makes GO also require the machine's kappa ≥ the median
	// annotator's; RequireStable makes it require the stop rule.
	RequireCeiling, RequireStable bool
}

// Settings records the options actually used.
type Settings struct {
	MaxError       float64 `json:"max_error"`
	Confidence     float64 `json:"confidence"`
	Level          float64 `json:"level"`
	Bootstrap      int     `json:"bootstrap"`
	Seed           uint64  `json:"seed"`
	MinCount       int     `json:"min_count"`
	Bins           int     `json:"bins"`
	StopKappa      float64 `json:"stop_kappa"`
	StopWindow     int     `json:"stop_window"`
	TargetError    float64 `json:"target_error"`
	RequireCeiling bool    `json:"require_ceiling"`
	RequireStable  bool    `json:"require_stable"`
}

// Decision is GO or NOT YET, with what supports it.
type Decision struct {
	Go bool `json:"go"`
	// Threshold, ArchiveCoverage and Bound describe the autolabel
	// threshold when one passed (also reported under NOT YET when other
	// requirements failed).
	Threshold       float64 `json:"threshold"`
	HeldOutCoverage float64 `json:"held_out_coverage"`
	ArchiveCoverage float64 `json:"archive_coverage"`
	Bound           float64 `json:"bound"`
	// Reasons says why NOT YET (empty for GO).
	Reasons []string `json:"reasons"`
	// Notes are warnings that do not change the decision.
	Notes []string `json:"notes"`
	// LabelsNeeded estimates the further labels before the learning curve
	// reaches the target error: −1 when unknown or not reachable.
	LabelsNeeded int `json:"labels_needed"`
}

// Report is the whole verdict.
type Report struct {
	Classes      []string     `json:"classes"`
	Decision     Decision     `json:"decision"`
	Agreement    Agreement    `json:"agreement"`
	Ceiling      *Ceiling     `json:"ceiling"`
	CoverageRisk []RiskPoint  `json:"coverage_risk"`
	Threshold    Threshold    `json:"threshold"`
	Calibration  Calibration  `json:"calibration"`
	Stop         *StopRule    `json:"stop"`
	Curve        []CurvePoint `json:"curve"`
	Compare      *Series      `json:"compare"`
	Fit          *PowerLaw    `json:"fit"`
	FitError     string       `json:"fit_error,omitempty"`
	Audit        *Audit       `json:"audit"`
	Settings     Settings     `json:"settings"`
}

func (o Options) settings() (Settings, error) {
	s := Settings{MaxError: o.MaxError, Confidence: o.Confidence, Level: o.Level, Bootstrap: o.Bootstrap,
		Seed: o.Seed, MinCount: o.MinCount, Bins: o.Bins, StopKappa: o.StopKappa, StopWindow: o.StopWindow,
		TargetError: o.TargetError, RequireCeiling: o.RequireCeiling, RequireStable: o.RequireStable}
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
	if s.MinCount <= 0 {
		s.MinCount = MinCountFor(s.MaxError, s.Confidence)
	}
	return s, nil
}

// Compute builds the report from in. Slices of mismatched length panic;
// invalid values (probabilities that are not probability vectors, classes
// outside the codebook, kappas outside [−1, 1], bad options) return an error
// naming the item or option.
func Compute(in Input, opt Options) (*Report, error) {
	s, err := opt.settings()
	if err != nil {
		return nil, err
	}
	k := len(in.Classes)
	if k < 2 {
		return nil, fmt.Errorf("classes: need at least two, have %d", k)
	}
	if len(in.Truth) != len(in.Proba) {
		panic(fmt.Sprintf("verdict: %d consensus classes and %d probability vectors", len(in.Truth), len(in.Proba)))
	}
	n := len(in.Truth)
	pred := make([]int, n)
	conf := make([]float64, n)
	wrong := make([]bool, n)
	right := make([]bool, n)
	for i, p := range in.Proba {
		if len(p) != k {
			return nil, fmt.Errorf("held-out item %d: %d probabilities for %d classes", i, len(p), k)
		}
		sum := 0.0
		for j, v := range p {
			if math.IsNaN(v) || v < -1e-9 || v > 1+1e-9 {
				return nil, fmt.Errorf("held-out item %d: probability of class %q is %v", i, in.Classes[j], v)
			}
			sum += v
			if v > p[pred[i]] {
				pred[i] = j
			}
		}
		if math.Abs(sum-1) > 1e-6 {
			return nil, fmt.Errorf("held-out item %d: probabilities sum to %v, not 1", i, sum)
		}
		conf[i] = math.Min(1, math.Max(0, p[pred[i]]))
		wrong[i] = pred[i] != in.Truth[i]
		right[i] = !wrong[i]
	}
	r := &Report{Classes: in.Classes, Settings: s, Curve: in.Curve, Compare: in.Compare}
	if r.Agreement, err = Agree(in.Truth, pred, in.Classes, s.Bootstrap, s.Level, s.Seed); err != nil {
		return nil, err
	}
	if in.Annotators != nil {
		c, err := CrowdCeiling(in.Annotators, r.Agreement.Kappa.Est)
		if err != nil {
			return nil, err
		}
		r.Ceiling = &c
	}
	if r.CoverageRisk, r.Threshold, err = CoverageRisk(conf, wrong, in.Archive, s.MaxError, s.Confidence, s.MinCount); err != nil {
		return nil, err
	}
	if r.Calibration, err = Calibrate(conf, right, s.Bins); err != nil {
		return nil, err
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
		f, err := FitPowerLaw(in.Curve, s.TargetError)
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
	r.Decision = decide(r)
	return r, nil
}

func decide(r *Report) Decision {
	s := r.Settings
	d := Decision{LabelsNeeded: -1, Reasons: []string{}, Notes: []string{}}
	th := r.Threshold
	if th.Found {
		d.Threshold, d.HeldOutCoverage, d.ArchiveCoverage, d.Bound = th.Threshold, th.Coverage, th.Archive, th.Upper
	} else {
		d.Reasons = append(d.Reasons, "no confidence threshold keeps the error bound within max-error: "+th.Stop)
	}
	if r.Ceiling != nil && !r.Ceiling.AtLeastMedian {
		msg := fmt.Sprintf("the machine's kappa %.3f is below the median annotator's %.3f", r.Ceiling.MachineKappa, r.Ceiling.Median)
		if s.RequireCeiling {
			d.Reasons = append(d.Reasons, msg)
		} else {
			d.Notes = append(d.Notes, msg)
		}
	}
	if s.RequireCeiling && r.Ceiling == nil {
		d.Reasons = append(d.Reasons, "the crowd ceiling is required but no annotator kappas were given")
	}
	stable := r.Stop != nil && r.Stop.Stable
	if !stable {
		msg := "predictions on the stop set have not yet stabilised"
		if r.Stop == nil {
			msg = "no stop-set predictions were given, so the stop rule was not applied"
		} else {
			msg += fmt.Sprintf(" (kappa ≥ %.2f for %d rounds in a row)", r.Stop.Threshold, r.Stop.Window)
		}
		if s.RequireStable {
			d.Reasons = append(d.Reasons, msg)
		} else {
			d.Notes = append(d.Notes, msg)
		}
	}
	if r.Audit != nil && r.Audit.Lo > s.MaxError {
		d.Reasons = append(d.Reasons, fmt.Sprintf("the audit found %d errors in %d machine labels: error %.3f, interval [%.3f, %.3f] lies above max-error %.3g",
			r.Audit.Errors, r.Audit.N, r.Audit.Rate, r.Audit.Lo, r.Audit.Hi, s.MaxError))
	}
	if th.Found && th.Archive == 0 {
		d.Notes = append(d.Notes, "no archive confidences were given or none reach the threshold: the expected archive coverage is 0")
	}
	if r.Fit != nil {
		if r.Fit.Reachable {
			d.LabelsNeeded = r.Fit.More
		} else {
			d.Notes = append(d.Notes, fmt.Sprintf("the learning curve levels off at error %.3f, not below the target %.3g: more labels alone will not get there", r.Fit.C, r.Fit.Target))
		}
	} else if r.FitError != "" {
		d.Notes = append(d.Notes, "no learning-curve estimate: "+r.FitError)
	}
	d.Go = len(d.Reasons) == 0
	return d
}
