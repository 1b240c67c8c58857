package verdict

import (
	"fmt"
	"math"
	"slices"

	"handoff/crowd"
)

// Annotator is one person's agreement with the crowd, computed elsewhere
// (round/, crowd/) and passed in: Kappa is Cohen's kappa of their labels
// against the leave-one-out consensus (the consensus without them), and
// Agreement the share of their labels that match it, over Items items.
type Annotator struct {
	ID        string  `json:"id"`
	Kappa     float64 `json:"kappa"`
	Agreement float64 `json:"agreement"`
	Items     int     `json:"items"`
}

// Ceiling is how well people agree with the crowd — the distribution of
// annotators' kappas and agreements — and the median-annotator gate: whether
// the machine agrees with the reference on the items it would autolabel at
// least as often as the median annotator agrees with the others.
type Ceiling struct {
	Annotators   []Annotator `json:"annotators"` // sorted by kappa, highest first
	Median       float64     `json:"median"`     // of the kappas
	Q1           float64     `json:"q1"`         // lower quartile of the kappas
	Q3           float64     `json:"q3"`         // upper quartile of the kappas
	MachineKappa float64     `json:"machine_kappa"`
	// MedianAgreement is the median of the annotators' agreements;
	// MachineAgreement the machine's agreement with the reference on the
	// MachineItems held-out items it would autolabel.
	MedianAgreement  float64 `json:"median_agreement"`
	MachineAgreement float64 `json:"machine_agreement"`
	MachineItems     int     `json:"machine_items"`
	// AtLeastMedian reports MachineAgreement ≥ MedianAgreement.
	AtLeastMedian bool `json:"at_least_median"`
}

// CrowdCeiling summarises annotators' kappas (median and quartiles, type 7
// quantiles, R's default) and agreements (median), and compares the
// machine's agreement machineAgree on machineItems items with the median
// annotator's. It returns an error if there are no annotators or a kappa or
// agreement is not finite or outside its range ([−1, 1], [0, 1]).
func CrowdCeiling(ann []Annotator, machineKappa, machineAgree float64, machineItems int) (Ceiling, error) {
	if len(ann) == 0 {
		return Ceiling{}, fmt.Errorf("annotators: none given for the crowd ceiling")
	}
	ks := make([]float64, len(ann))
	ag := make([]float64, len(ann))
	for i, a := range ann {
		if math.IsNaN(a.Kappa) || a.Kappa < -1 || a.Kappa > 1 {
			return Ceiling{}, fmt.Errorf("annotator %q: kappa %v is not in [−1, 1]", a.ID, a.Kappa)
		}
		if math.IsNaN(a.Agreement) || a.Agreement < 0 || a.Agreement > 1 {
			return Ceiling{}, fmt.Errorf("annotator %q: agreement %v is not in [0, 1]", a.ID, a.Agreement)
		}
		ks[i], ag[i] = a.Kappa, a.Agreement
	}
	slices.Sort(ks)
	slices.Sort(ag)
	c := Ceiling{Annotators: slices.Clone(ann), Median: quantile7(ks, 0.5), Q1: quantile7(ks, 0.25), Q3: quantile7(ks, 0.75),
		MachineKappa: machineKappa, MedianAgreement: quantile7(ag, 0.5), MachineAgreement: machineAgree, MachineItems: machineItems}
	slices.SortStableFunc(c.Annotators, func(a, b Annotator) int {
		switch {
		case a.Kappa > b.Kappa:
			return -1
		case a.Kappa < b.Kappa:
			return 1
		}
		return 0
	})
	c.AtLeastMedian = machineItems > 0 && machineAgree >= c.MedianAgreement
	return c, nil
}

// Bin is one bin of a reliability diagram.
type Bin struct {
	Lo         float64 `json:"lo"`
	Hi         float64 `json:"hi"`
	N          int     `json:"n"`
	Confidence float64 `json:"confidence"` // mean confidence in the bin (0 if empty)
	Accuracy   float64 `json:"accuracy"`   // share correct in the bin (0 if empty)
}

// Calibration is the expected calibration error and the reliability diagram.
type Calibration struct {
	ECE  float64 `json:"ece"`
	Bins []Bin   `json:"bins"`
}

// Calibrate returns the expected calibration error (Naeini et al. 2015; Guo
// et al. 2017) over nbins equal-width confidence bins on [0, 1]:
//
//	ECE = Σ_b (n_b / n) |acc_b − conf_b|
//
// where item i falls in bin min(⌊conf_i·nbins⌋, nbins−1). nbins ≤ 0 means
// 15. Length mismatch panics; an empty set or a confidence outside [0, 1]
// returns an error.
func Calibrate(conf []float64, correct []bool, nbins int) (Calibration, error) {
	if len(conf) != len(correct) {
		panic(fmt.Sprintf("verdict: %d confidences and %d outcomes", len(conf), len(correct)))
	}
	if nbins <= 0 {
		nbins = 15
	}
	if len(conf) == 0 {
		return Calibration{}, fmt.Errorf("calibration: no items")
	}
	bins := make([]Bin, nbins)
	for b := range bins {
		bins[b].Lo, bins[b].Hi = float64(b)/float64(nbins), float64(b+1)/float64(nbins)
	}
	for i, c := range conf {
		if math.IsNaN(c) || c < 0 || c > 1 {
			return Calibration{}, fmt.Errorf("item %d: confidence %v is not in [0, 1]", i, c)
		}
		b := min(int(c*float64(nbins)), nbins-1)
		bins[b].N++
		bins[b].Confidence += c
		if correct[i] {
			bins[b].Accuracy++
		}
	}
	ece := 0.0
	for b := range bins {
		if bins[b].N == 0 {
			continue
		}
		nb := float64(bins[b].N)
		bins[b].Confidence /= nb
		bins[b].Accuracy /= nb
		ece += nb / float64(len(conf)) * math.Abs(bins[b].Accuracy-bins[b].Confidence)
	}
	return Calibration{ECE: ece, Bins: bins}, nil
}

// StopRule is the stabilising-predictions stop rule (Bloodgood &
// Vijay-Shanker 2009): the model's predictions on a fixed random stop set
// are compared between consecutive rounds by Cohen's kappa; learning may stop
// once the last Window kappas are all ≥ Threshold. (The paper averages the
// last three kappas; we require each of them, which is stricter.)
type StopRule struct {
	Kappas    []float64 `json:"kappas"` // Kappas[r] compares round r with round r+1
	Threshold float64   `json:"threshold"`
	Window    int       `json:"window"`
	Stable    bool      `json:"stable"`
}

// Stability applies the stop rule to rounds[r], the predicted classes (in
// [0, k)) on the stop set after round r, oldest first. threshold 0 means
// 0.99 and window 0 means 3. Rounds of different lengths panic.
func Stability(rounds [][]int, k int, threshold float64, window int) StopRule {
	if threshold == 0 {
		threshold = 0.99
	}
	if window <= 0 {
		window = 3
	}
	s := StopRule{Threshold: threshold, Window: window, Kappas: []float64{}}
	for r := 1; r < len(rounds); r++ {
		kp, err := crowd.CohenKappa(rounds[r-1], rounds[r], k)
		if err != nil && slices.Equal(rounds[r-1], rounds[r]) {
			// Identical predictions that all name one class: κ is
			// undefined (crowd.CohenKappa), but nothing changed between
			// the rounds, which is what the rule asks.
			kp.Kappa = 1
		}
		s.Kappas = append(s.Kappas, kp.Kappa)
	}
	if len(s.Kappas) >= window {
		s.Stable = true
		for _, v := range s.Kappas[len(s.Kappas)-window:] {
			if v < threshold {
				s.Stable = false
			}
		}
	}
	return s
}

// Audit is the post-handoff error measured on a random sample of
// machine-labelled items that people labelled afterwards.
type Audit struct {
	N      int     `json:"n"`
	Errors int     `json:"errors"`
	Rate   float64 `json:"rate"`
	Lo     float64 `json:"lo"` // two-sided Clopper–Pearson interval at Level
	Hi     float64 `json:"hi"`
	Level  float64 `json:"level"`
}

// AuditError returns the audit error rate errors/n with its two-sided
// Clopper–Pearson interval at level (0 means 0.95). It returns an error
// unless 0 ≤ errors ≤ n and n > 0.
func AuditError(errors, n int, level float64) (Audit, error) {
	if level == 0 {
		level = 0.95
	}
	if n <= 0 || errors < 0 || errors > n {
		return Audit{}, fmt.Errorf("audit: %d errors in %d items (want 0 ≤ errors ≤ items, items > 0)", errors, n)
	}
	if !(level > 0 && level < 1) {
		return Audit{}, fmt.Errorf("audit: level %v is not in (0, 1)", level)
	}
	lo, hi := ClopperPearson(errors, n, level)
	return Audit{N: n, Errors: errors, Rate: float64(errors) / float64(n), Lo: lo, Hi: hi, Level: level}, nil
}
