package learner

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
)

// ECEBins is the number of equal-width confidence bins ECE uses.
const ECEBins = 15

// ECE returns the expected calibration error of probs against the true
// classes labels (Naeini et al. 2015; Guo et al. 2017, eq. 3):
//
//	ECE = Σ_b (|B_b| / n) · |acc(B_b) − conf(B_b)|
//
// where each row falls in bin b = ⌈conf·15⌉ − 1 of the 15 equal-width bins
// (b/15, (b+1)/15] by its confidence conf = max_c probs[i][c] (a confidence
// of 0 goes to the first bin), acc(B) is the share of the bin's rows whose
// most probable class (the first on ties) equals labels[i], and conf(B) the
// bin's mean confidence. Rows are unweighted. It returns 0 for no rows and
// panics if len(labels) != len(probs).
func ECE(probs [][]float64, labels []int) float64 {
	if len(labels) != len(probs) {
		panic(fmt.Sprintf("learner: %d labels for %d probability rows", len(labels), len(probs)))
	}
	if len(probs) == 0 {
		return 0
	}
	var cnt, hit, conf [ECEBins]float64
	for i, p := range probs {
		c := floats.MaxIdx(p)
		b := int(math.Ceil(p[c]*ECEBins)) - 1
		b = min(max(b, 0), ECEBins-1)
		cnt[b]++
		conf[b] += p[c]
		if c == labels[i] {
			hit[b]++
		}
	}
	var e float64
	for b := range cnt {
		if cnt[b] > 0 {
			e += math.Abs(hit[b] - conf[b]) // = |B|·|acc − conf|
		}
	}
	return e / float64(len(probs))
}

// Calibrated is a model whose probabilities are temperature-scaled (Guo et
// al. 2017): P_T(c|x) = softmax_c(log P(c|x) / T), with log P clamped below
// at log 1e-300 so a zero probability stays finite. For logistic regression
// and naive Bayes this equals dividing the scores by T. T > 1 softens
// over-confident models, T < 1 sharpens.
type Calibrated struct {
	Base        Model
	Temperature float64
}

// Classes returns the base model's number of classes.
func (m *Calibrated) Classes() int { return m.Base.Classes() }

// PredictProba returns the temperature-scaled probabilities of every row.
func (m *Calibrated) PredictProba(X features.Matrix) [][]float64 { return predictRows(m, X) }

// PredictProbaInto writes the temperature-scaled probabilities into dst.
func (m *Calibrated) PredictProbaInto(dst []float64, X features.Matrix) {
	m.Base.PredictProbaInto(dst, X)
	k := m.Base.Classes()
	for i := 0; i+k <= len(dst); i += k {
		scale(dst[i:i+k], m.Temperature)
	}
}

const minLogP = -690.7755 // log 1e-300

// scale replaces the probabilities p by softmax(log p / T) in place.
func scale(p []float64, T float64) {
	if T == 1 {
		return
	}
	for c, v := range p {
		p[c] = max(math.Log(v), minLogP) / T
	}
	softmaxInPlace(p)
}

// Calibration reports a temperature fit: the temperature and, on the
// validation rows, the expected calibration error (ECE, 15 bins) and the
// weighted mean negative log-likelihood before (T = 1) and after.
type Calibration struct {
	Temperature         float64
	ECEBefore, ECEAfter float64
	NLLBefore, NLLAfter float64
}

// Calibrate fits a temperature T to a fitted model on validation rows that
// were not used to train it, by minimising the weighted mean negative
// log-likelihood of the soft targets (Guo et al. 2017)
//
//	NLL(T) = Σ_i w_i Σ_c −t_ic log P_T(c|x_i) / Σ_i w_i
//
// over log T ∈ [log 0.05, log 20] by golden-section search (NLL is
// convex in 1/T), and returns the wrapped model with its report. ECE
// uses each row's most probable target class as its label. weights == nil
// means all ones. It returns an error for no rows or bad targets.
func Calibrate(m Model, X features.Matrix, targets [][]float64, weights []float64) (*Calibrated, Calibration, error) {
	k := checkShape(X, targets, weights)
	n := X.Rows()
	if n == 0 {
		return nil, Calibration{}, fmt.Errorf("learner: calibration needs validation rows: %w", ErrEmpty)
	}
	if k != m.Classes() {
		panic(fmt.Sprintf("learner: targets have %d classes, the model %d", k, m.Classes()))
	}
	var wsum float64
	for i, t := range targets {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		if math.IsNaN(w) || w < 0 || math.IsInf(w, 0) {
			return nil, Calibration{}, fmt.Errorf("learner: weight of validation row %d is %v: weights must be finite and ≥ 0", i, w)
		}
		wsum += w
		for c, v := range t {
			if math.IsNaN(v) || v < 0 || math.IsInf(v, 0) {
				return nil, Calibration{}, fmt.Errorf("learner: target of validation row %d, class %d is %v", i, c, v)
			}
		}
	}
	if wsum == 0 {
		return nil, Calibration{}, fmt.Errorf("learner: every validation row has weight 0")
	}
	base := make([]float64, n*k)
	m.PredictProbaInto(base, X)
	cal := fitTemperature(base, n, k, targets, weights, wsum)
	return &Calibrated{Base: m, Temperature: cal.Temperature}, cal, nil
}

// FitTemperature fits a temperature to probabilities that come from models
// which did not see the rows (for example out-of-fold predictions of k-fold
// cross-validation), as Calibrate does for one model's validation rows:
// probs[i] are row i's predicted class probabilities and targets[i] its soft
// targets, all rows weighted equally. It panics if the lengths differ and
// returns T = 1 for no rows.
func FitTemperature(probs, targets [][]float64) Calibration {
	if len(probs) != len(targets) {
		panic("learner: FitTemperature with mismatched lengths")
	}
	n := len(probs)
	if n == 0 {
		return Calibration{Temperature: 1}
	}
	k := len(probs[0])
	base := make([]float64, 0, n*k)
	for _, p := range probs {
		base = append(base, p...)
	}
	return fitTemperature(base, n, k, targets, nil, float64(n))
}

// fitTemperature minimises the weighted mean NLL of the targets over
// log T by golden-section search; base holds n×k probabilities row-major.
func fitTemperature(base []float64, n, k int, targets [][]float64, weights []float64, wsum float64) Calibration {
	logp := make([]float64, n*k)
	for i, v := range base {
		logp[i] = max(math.Log(v), minLogP)
	}
	buf := make([]float64, k)
	nll := func(T float64) float64 {
		var s float64
		for i := 0; i < n; i++ {
			for c := 0; c < k; c++ {
				buf[c] = logp[i*k+c] / T
			}
			lse := logSumExp(buf)
			w := 1.0
			if weights != nil {
				w = weights[i]
			}
			for c, t := range targets[i] {
				if t != 0 {
					s += w * t * (lse - buf[c])
				}
			}
		}
		return s / wsum
	}
	// Golden-section search on u = log T.
	const phi = 0.6180339887498949
	a, b := math.Log(0.05), math.Log(20)
	x1, x2 := b-phi*(b-a), a+phi*(b-a)
	f1, f2 := nll(math.Exp(x1)), nll(math.Exp(x2))
	for b-a > 1e-6 {
		if f1 <= f2 {
			b, x2, f2 = x2, x1, f1
			x1 = b - phi*(b-a)
			f1 = nll(math.Exp(x1))
		} else {
			a, x1, f1 = x1, x2, f2
			x2 = a + phi*(b-a)
			f2 = nll(math.Exp(x2))
		}
	}
	T := math.Exp((a + b) / 2)
	cal := Calibration{Temperature: T, NLLBefore: nll(1), NLLAfter: nll(T)}
	if cal.NLLAfter > cal.NLLBefore { // the search cannot lose to T = 1
		T, cal.Temperature, cal.NLLAfter = 1, 1, cal.NLLBefore
	}
	labels := make([]int, n)
	before := make([][]float64, n)
	after := make([][]float64, n)
	for i := range labels {
		labels[i] = floats.MaxIdx(targets[i])
		before[i] = base[i*k : (i+1)*k]
		after[i] = append([]float64(nil), before[i]...)
		scale(after[i], T)
	}
	cal.ECEBefore, cal.ECEAfter = ECE(before, labels), ECE(after, labels)
	return cal
}

func logSumExp(z []float64) float64 {
	m := z[0]
	for _, v := range z[1:] {
		m = max(m, v)
	}
	var s float64
	for _, v := range z {
		s += math.Exp(v - m)
	}
	return m + math.Log(s)
}
