package learner

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"

	"handoff/features"
)

// Bayes configures multinomial naive Bayes for counts or TF-IDF weights
// (McCallum & Nigam 1998; Manning, Raghavan & Schütze 2008, ch. 13).
//
// With soft targets t and weights w, each row adds fractional counts:
//
//	N_c  = Σ_i w_i t_ic                 (class mass)
//	N_cj = Σ_i w_i t_ic x_ij            (feature mass per class)
//	log P(c)   = log(N_c / Σ_c N_c)
//	log P(j|c) = log((N_cj + α) / (Σ_j N_cj + α·D))
//
// and a row x is scored as P(c|x) ∝ P(c) ∏_j P(j|c)^x_j, normalised with
// log-sum-exp. X must be non-negative.
type Bayes struct {
	// Alpha is the additive (Laplace / Lidstone) smoothing α > 0;
	// 0 means the default 1 (add-one). Negative values are an error.
	Alpha float64
	// Threads is the number of goroutines PredictProbaInto uses;
	// 0 means GOMAXPROCS.
	Threads int
}

// BayesModel is a fitted multinomial naive Bayes model.
type BayesModel struct {
	Config   Bayes
	K, D     int
	LogPrior []float64 // log P(c), length K
	LogProb  []float64 // log P(j|c) at [j*K+c], length D*K
}

// Fit trains naive Bayes; see Learner for the rules on its arguments.
func (b Bayes) Fit(X features.Matrix, targets [][]float64, weights []float64) (Model, error) {
	if b.Alpha < 0 || math.IsNaN(b.Alpha) || math.IsInf(b.Alpha, 0) {
		return nil, fmt.Errorf("learner: naive Bayes smoothing alpha %v: must be a finite number > 0 (0 means 1)", b.Alpha)
	}
	k, err := validate(X, targets, weights, true)
	if err != nil {
		return nil, err
	}
	alpha := b.Alpha
	if alpha == 0 {
		alpha = 1
	}
	d := X.Cols()
	m := &BayesModel{Config: b, K: k, D: d, LogPrior: make([]float64, k), LogProb: make([]float64, d*k)}
	m.Config.Alpha = alpha
	classMass := make([]float64, k)
	for i := 0; i < X.Rows(); i++ {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		if w == 0 {
			continue
		}
		t := targets[i]
		for c, v := range t {
			classMass[c] += w * v
		}
		idx, val := X.Row(i)
		for p, x := range val {
			j := p
			if idx != nil {
				j = int(idx[p])
			}
			row := m.LogProb[j*k : j*k+k]
			for c, v := range t {
				row[c] += w * v * x
			}
		}
	}
	var total float64
	for _, v := range classMass {
		total += v
	}
	for c := range m.LogPrior {
		m.LogPrior[c] = math.Log(classMass[c] / total)
	}
	featMass := make([]float64, k)
	for j := 0; j < d; j++ {
		for c := 0; c < k; c++ {
			featMass[c] += m.LogProb[j*k+c]
		}
	}
	for c := range featMass {
		featMass[c] = math.Log(featMass[c] + alpha*float64(d))
	}
	for j := 0; j < d; j++ {
		for c := 0; c < k; c++ {
			m.LogProb[j*k+c] = math.Log(m.LogProb[j*k+c]+alpha) - featMass[c]
		}
	}
	return m, nil
}

// Classes returns the number of classes.
func (m *BayesModel) Classes() int { return m.K }

// PredictProba returns P(c|x) for every row of X.
func (m *BayesModel) PredictProba(X features.Matrix) [][]float64 { return predictRows(m, X) }

// PredictProbaInto writes P(c|x) for every row of X into dst (row-major).
func (m *BayesModel) PredictProbaInto(dst []float64, X features.Matrix) {
	linearPredict(dst, X, m.K, m.D, m.LogProb, m.LogPrior, 1, m.Config.Threads)
}

// linearPredict writes softmax((W^T x + b) / temp) for each row x of X into
// dst; W is D×K row-major.
func linearPredict(dst []float64, X features.Matrix, k, d int, W, b []float64, temp float64, nthreads int) {
	n := X.Rows()
	if len(dst) != n*k {
		panic(fmt.Sprintf("learner: dst has length %d, want %d rows × %d classes", len(dst), n, k))
	}
	if X.Cols() != d {
		panic(fmt.Sprintf("learner: matrix has %d columns, the model was trained on %d", X.Cols(), d))
	}
	parallelRows(n, threads(nthreads), func(lo, hi int) {
		for i := lo; i < hi; i++ {
			z := dst[i*k : (i+1)*k]
			copy(z, b)
			idx, val := X.Row(i)
			if idx != nil {
				for p, x := range val {
					j := int(idx[p])
					axpy(z, x, W[j*k:j*k+k])
				}
			} else {
				for j, x := range val {
					if x != 0 {
						axpy(z, x, W[j*k:j*k+k])
					}
				}
			}
			if temp != 1 {
				for c := range z {
					z[c] /= temp
				}
			}
			softmaxInPlace(z)
		}
	})
}

// axpy does y += a*x (gonum's assembly kernel); len(x) must equal len(y).
func axpy(y []float64, a float64, x []float64) {
	floats.AddScaled(y, a, x)
}
