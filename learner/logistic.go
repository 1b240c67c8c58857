package learner

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/optimize"

	"handoff/features"
)

// Logistic configures multinomial logistic regression with an L2 penalty,
// fitted by L-BFGS (gonum.org/v1/gonum/optimize).
//
// The model is P(c|x) = softmax_c(Σ_j W_jc x_j + b_c). Fit minimises
//
//	f(W, b) = Σ_i w_i · (−Σ_c t_ic log P(c|x_i)) + λ/2 · Σ_jc W_jc²
//
// the weighted cross-entropy of the soft targets t against the model plus a
// ridge on the weights; the intercepts b are not penalised. This is
// scikit-learn's multinomial LogisticRegression objective divided by C, so
// λ = 1/C (sklearn's C = 1 is λ = 1; C = 10 is λ = 0.1). λ = 0 gives the
// unpenalised maximum-likelihood fit (for two classes the per-class weights
// are then identified only up to a common shift: the difference W_·1 − W_·0
// equals the coefficients of R's glm(family = binomial)).
//
// The objective and gradient are computed sparse-aware in one pass over the
// stored entries of X, split by rows over Threads goroutines (scores with
// log-sum-exp, then the residuals scattered into per-goroutine gradients).
// L-BFGS runs on rescaled variables u_j = s_j W_j, u_b = s_b b with
// s_j = √(Σ_i w_i x_ij² / K + λ) and s_b = √(Σ_i w_i / K), a rough square
// root of each weight's curvature at the start (p ≈ 1/K): a diagonal
// preconditioner that leaves the minimiser unchanged but cuts the
// iterations many-fold on text, where column frequencies span orders of
// magnitude. With the same inputs and Threads a fit is bit-for-bit
// reproducible; another Threads sums in another order and may change the
// last digits.
type Logistic struct {
	// Lambda is the L2 penalty λ ≥ 0 on the weights (λ = 1/C).
	Lambda float64
	// MaxIter caps the L-BFGS iterations; 0 means 500.
	MaxIter int
	// Tol stops the fit once the largest gradient entry ∂f/∂W_jc or
	// ∂f/∂b_c, divided by the total row weight Σ w_i, is below Tol (a
	// per-row mean gradient), or once the last five iterations together
	// have lowered f by less than 5·10·Tol relative to f (a mean relative
	// improvement below 10·Tol per iteration); 0 means 1e-4 (on TF-IDF
	// text this stops once held-out accuracy has levelled off). For
	// coefficients to many digits use a small Tol such as 1e-10.
	Tol float64
	// Memory is the number of L-BFGS correction pairs kept; 0 means 5
	// (half the memory and vector work of 10, with as few iterations on
	// the preconditioned text problems we measured).
	Memory int
	// Threads is the number of goroutines for the gradient and for
	// PredictProbaInto; 0 means GOMAXPROCS.
	Threads int
}

// LogisticModel is a fitted multinomial logistic regression.
type LogisticModel struct {
	Config      Logistic
	K, D        int
	W           []float64 // weights W_jc at [j*K+c], length D*K; Σ_c W_jc = 0
	B           []float64 // intercepts b_c, length K; Σ_c b_c = 0
	Objective   float64   // f(W, b) at the solution
	Iterations  int       // L-BFGS major iterations used
	Evaluations int       // objective and gradient evaluations used
	Status      string    // why the optimiser stopped
}

// Fit trains the logistic regression; see Learner for the rules on its
// arguments.
func (l Logistic) Fit(X features.Matrix, targets [][]float64, weights []float64) (Model, error) {
	if l.Lambda < 0 || math.IsNaN(l.Lambda) || math.IsInf(l.Lambda, 0) {
		return nil, fmt.Errorf("learner: logistic penalty lambda %v: must be finite and ≥ 0", l.Lambda)
	}
	if l.Tol < 0 || l.MaxIter < 0 || l.Memory < 0 {
		return nil, errors.New("learner: logistic Tol, MaxIter and Memory must be ≥ 0")
	}
	k, err := validate(X, targets, weights, false)
	if err != nil {
		return nil, err
	}
	cfg := l
	if cfg.MaxIter == 0 {
		cfg.MaxIter = 500
	}
	if cfg.Tol == 0 {
		cfg.Tol = 1e-4
	}
	if cfg.Memory == 0 {
		cfg.Memory = 5
	}
	o := newLogObjective(X, targets, weights, k, cfg.Lambda, threads(cfg.Threads))
	d := o.d
	x0 := make([]float64, d*k+k)
	// Start from the log class shares as intercepts.
	for c := 0; c < k; c++ {
		x0[d*k+c] = math.Log(o.mass[c]/o.wsum) * o.sb
	}
	prob := optimize.Problem{Func: o.fn, Grad: o.grad}
	// gonum's own gradient test is switched off (NaN) in favour of conv,
	// which checks the same ∞-norm once per iteration.
	settings := &optimize.Settings{
		GradientThreshold: math.NaN(),
		MajorIterations:   cfg.MaxIter,
		Converger:         &converger{gradTol: cfg.Tol * o.wsum, o: o, relTol: 10 * cfg.Tol},
	}
	res, err := optimize.Minimize(prob, x0, settings, &optimize.LBFGS{Store: cfg.Memory})
	if res == nil {
		return nil, fmt.Errorf("learner: logistic fit failed: %v", err)
	}
	for _, v := range res.X {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("learner: logistic fit diverged (%v); with lambda = 0 and separable classes the maximum-likelihood weights are infinite: use lambda > 0", res.Status)
		}
	}
	if math.IsNaN(res.F) || math.IsInf(res.F, 0) {
		return nil, fmt.Errorf("learner: logistic fit reached a non-finite objective (%v)", res.Status)
	}
	// L-BFGS may end on a line-search failure once it can no longer make
	// progress at machine precision; the point reached is still the best
	// found, so it is kept and the reason is recorded in Status.
	status := res.Status.String()
	if err != nil {
		status += ": " + err.Error()
	}
	m := &LogisticModel{
		Config: cfg, K: k, D: d,
		W:           make([]float64, d*k),
		B:           make([]float64, k),
		Objective:   res.F,
		Iterations:  res.Stats.MajorIterations,
		Evaluations: res.Stats.FuncEvaluations,
		Status:      status,
	}
	for nj, j := range o.perm {
		for c := 0; c < k; c++ {
			m.W[int(j)*k+c] = res.X[nj*k+c] / o.scale[nj]
		}
	}
	for c := range m.B {
		m.B[c] = res.X[d*k+c] / o.sb
	}
	// Softmax is unchanged by adding a constant to every class's score, so
	// the unpenalised intercepts (and for λ = 0 the weights) are identified
	// only up to a shift; centre them to sum to zero over the classes, as
	// scikit-learn's solution does.
	centre(m.B)
	for j := 0; j < d; j++ {
		centre(m.W[j*k : j*k+k])
	}
	return m, nil
}

// converger stops L-BFGS when the largest gradient entry (in W and b) is
// below gradTol, or when f_{t−5} − f_t < 5·relTol·|f_t|.
type converger struct {
	gradTol float64
	o       *logObjective
	relTol  float64
	hist    []float64
}

const convWindow = 5

func (c *converger) Init(dim int) { c.hist = c.hist[:0] }

func (c *converger) Converged(loc *optimize.Location) optimize.Status {
	// ∂f/∂W_j = s_j ∂f/∂u_j and ∂f/∂b = sb ∂f/∂u_b.
	var m float64
	k := c.o.k
	g := loc.Gradient
	for j, s := range c.o.scale {
		for _, v := range g[j*k : j*k+k] {
			m = max(m, math.Abs(v)*s)
		}
	}
	for _, v := range g[len(g)-k:] {
		m = max(m, math.Abs(v)*c.o.sb)
	}
	if m < c.gradTol {
		return optimize.GradientThreshold
	}
	c.hist = append(c.hist, loc.F)
	if t := len(c.hist) - 1; t >= convWindow {
		if c.hist[t-convWindow]-loc.F < convWindow*c.relTol*math.Abs(loc.F) {
			return optimize.FunctionConvergence
		}
	}
	return optimize.NotTerminated
}

// centre subtracts the mean from v.
func centre(v []float64) {
	var s float64
	for _, x := range v {
		s += x
	}
	s /= float64(len(v))
	for i := range v {
		v[i] -= s
	}
}

// Classes returns the number of classes.
func (m *LogisticModel) Classes() int { return m.K }

// PredictProba returns P(c|x) for every row of X.
func (m *LogisticModel) PredictProba(X features.Matrix) [][]float64 { return predictRows(m, X) }

// PredictProbaInto writes P(c|x) for every row of X into dst (row-major).
func (m *LogisticModel) PredictProbaInto(dst []float64, X features.Matrix) {
	linearPredict(dst, X, m.K, m.D, m.W, m.B, 1, m.Config.Threads)
}

// logObjective evaluates f and ∇f in one pass over the rows of X (CSR):
// each row's scores, log-sum-exp and residual r_i = w_i (p_i − t_i) are
// formed and at once scattered into the gradient, ∇_W += x_i r_iᵀ. Each of
// the nthreads goroutines takes a block of rows and its own gradient buffer;
// a second pass over the columns adds the buffers and the penalty λ W.
type logObjective struct {
	n, d, k  int
	lambda   float64
	nthreads int

	rowptr []int
	rowcol []int32
	rowval []float64
	rowcut []int   // row block boundaries, about equal entries per block
	perm   []int32 // perm[internal column] = column of X

	// Diagonal preconditioning by a change of variables: the optimiser
	// works on u_j = s_j W_j and u_b = sb·b, so X's column j is stored
	// divided by s_j and the penalty on u_j is λ_j = λ / s_j².
	scale []float64 // s_j per internal column
	sb    float64
	lamj  []float64

	t    []float64 // targets, n*k
	w    []float64 // weights, n
	wsum float64
	mass []float64 // Σ_i w_i t_ic

	gbuf [][]float64 // gradient buffers of goroutines 1..nthreads-1
	part [][]float64 // per goroutine: intercept gradient (k) and loss
	regs []float64

	xc    []float64 // cached point
	fc    float64
	gc    []float64
	valid bool
}

func newLogObjective(X features.Matrix, targets [][]float64, weights []float64, k int, lambda float64, nthreads int) *logObjective {
	n, d := X.Rows(), X.Cols()
	if nthreads > n {
		nthreads = n
	}
	o := &logObjective{n: n, d: d, k: k, lambda: lambda, nthreads: nthreads}
	o.rowptr = make([]int, n+1)
	nnz := 0
	for i := 0; i < n; i++ {
		idx, val := X.Row(i)
		for _, v := range val {
			if v != 0 || idx != nil {
				nnz++
			}
		}
		o.rowptr[i+1] = nnz
	}
	o.rowcol = make([]int32, nnz)
	o.rowval = make([]float64, nnz)
	q := 0
	for i := 0; i < n; i++ {
		idx, val := X.Row(i)
		for p, v := range val {
			if idx == nil && v == 0 {
				continue
			}
			j := int32(p)
			if idx != nil {
				j = idx[p]
			}
			o.rowcol[q], o.rowval[q] = j, v
			q++
		}
	}
	// Renumber the columns by decreasing entry count, so the weight and
	// gradient rows of frequent features sit together in memory (far fewer
	// cache and TLB misses on text, whose term frequencies are Zipfian).
	// The optimisation runs in this order; Fit restores the original one.
	count := make([]int, d)
	for _, j := range o.rowcol {
		count[j]++
	}
	o.perm = make([]int32, d) // perm[new] = old
	for j := range o.perm {
		o.perm[j] = int32(j)
	}
	slices.SortStableFunc(o.perm, func(a, b int32) int { return count[b] - count[a] })
	inv := make([]int32, d)
	for nj, j := range o.perm {
		inv[j] = int32(nj)
	}
	for p, j := range o.rowcol {
		o.rowcol[p] = inv[j]
	}
	o.setScale(weights, k)
	// Row blocks with about equal (entries + rows).
	o.rowcut = []int{0}
	total := nnz + n
	c := 1
	for i := 0; i < n && c < nthreads; i++ {
		if o.rowptr[i+1]+i+1 >= c*total/nthreads {
			o.rowcut = append(o.rowcut, i+1)
			c++
		}
	}
	for len(o.rowcut) < nthreads+1 {
		o.rowcut = append(o.rowcut, n)
	}
	o.rowcut[nthreads] = n

	o.t = make([]float64, n*k)
	o.w = make([]float64, n)
	o.mass = make([]float64, k)
	for i := 0; i < n; i++ {
		copy(o.t[i*k:], targets[i])
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		o.w[i] = w
		o.wsum += w
		for c, v := range targets[i] {
			o.mass[c] += w * v
		}
	}
	o.gbuf = make([][]float64, nthreads-1)
	for i := range o.gbuf {
		o.gbuf[i] = make([]float64, d*k)
	}
	o.part = make([][]float64, nthreads)
	for i := range o.part {
		o.part[i] = make([]float64, 3*k+1)
	}
	o.regs = make([]float64, nthreads)
	o.gc = make([]float64, d*k+k)
	o.xc = make([]float64, d*k+k)
	return o
}

// setScale sets the variable scales (see Logistic) and divides the stored
// values of X by them.
func (o *logObjective) setScale(weights []float64, k int) {
	d := o.d
	o.scale = make([]float64, d)
	o.lamj = make([]float64, d)
	var wsum float64
	for i := 0; i < o.n; i++ {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		wsum += w
		for p := o.rowptr[i]; p < o.rowptr[i+1]; p++ {
			v := o.rowval[p]
			o.scale[o.rowcol[p]] += w * v * v
		}
	}
	c := 1 / float64(k)
	for j, h := range o.scale {
		s := math.Sqrt(h*c + o.lambda)
		if !(s > 0) || math.IsInf(s, 0) {
			s = 1
		}
		o.scale[j] = s
		o.lamj[j] = o.lambda / (s * s)
	}
	o.sb = math.Sqrt(wsum * c)
	if !(o.sb > 0) || math.IsInf(o.sb, 0) {
		o.sb = 1
	}
	for i := 0; i < o.n; i++ {
		for p := o.rowptr[i]; p < o.rowptr[i+1]; p++ {
			o.rowval[p] /= o.scale[o.rowcol[p]]
		}
	}
}

func (o *logObjective) fn(x []float64) float64 {
	if o.valid && floats.Equal(x, o.xc) {
		return o.fc
	}
	copy(o.xc, x)
	o.fc = o.eval(x, o.gc)
	o.valid = true
	return o.fc
}

func (o *logObjective) grad(g, x []float64) {
	if !(o.valid && floats.Equal(x, o.xc)) {
		copy(o.xc, x)
		o.fc = o.eval(x, o.gc)
		o.valid = true
	}
	copy(g, o.gc)
}

// eval returns f(x) and writes ∇f(x) into g.
func (o *logObjective) eval(x, g []float64) float64 {
	d, k, nt := o.d, o.k, o.nthreads
	W, ub := x[:d*k], x[d*k:]
	b := o.part[0][2*k+1:] // b = u_b / sb
	for c, v := range ub {
		b[c] = v / o.sb
	}
	var wg sync.WaitGroup
	// Pass 1 over rows: the loss Σ_i w_i Σ_c t_ic (lse(z_i) − z_ic), the
	// intercept gradient Σ_i r_i and each block's X_blockᵀ R_block.
	for c := 0; c < nt; c++ {
		lo, hi := o.rowcut[c], o.rowcut[c+1]
		part := o.part[c]
		gw := g[:d*k]
		if c > 0 {
			gw = o.gbuf[c-1]
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			clear(gw)
			clear(part[:2*k+1])
			gb, z := part[:k], part[k:2*k]
			var loss float64
			for i := lo; i < hi; i++ {
				copy(z, b)
				cols, vals := o.rowcol[o.rowptr[i]:o.rowptr[i+1]], o.rowval[o.rowptr[i]:o.rowptr[i+1]]
				for p, j := range cols {
					axpy(z, vals[p], W[int(j)*k:int(j)*k+k])
				}
				mx := z[0]
				for _, v := range z[1:] {
					if v > mx {
						mx = v
					}
				}
				// Loss with the log-sum-exp shift: Σ_c t_c (mx − z_c) + log s.
				t := o.t[i*k : (i+1)*k]
				var s, li, ts float64
				for c, v := range z {
					if t[c] != 0 {
						li += t[c] * (mx - v)
						ts += t[c]
					}
					e := math.Exp(v - mx)
					z[c] = e
					s += e
				}
				w := o.w[i]
				loss += w * (li + ts*math.Log(s))
				ws := w / s
				for c, e := range z {
					r := ws*e - w*t[c]
					z[c] = r
					gb[c] += r
				}
				for p, j := range cols {
					axpy(gw[int(j)*k:int(j)*k+k], vals[p], z)
				}
			}
			part[2*k] = loss
		}()
	}
	wg.Wait()
	var f float64
	gb := g[d*k:]
	clear(gb)
	for _, part := range o.part {
		for c := 0; c < k; c++ {
			gb[c] += part[c] / o.sb
		}
		f += part[2*k]
	}
	// Pass 2 over columns: ∇_u = Σ blocks + λ_j u_j and the penalty
	// Σ_j λ_j/2 ‖u_j‖² (= λ/2 ‖W‖²).
	for c := 0; c < nt; c++ {
		lo, hi := c*d/nt, (c+1)*d/nt
		wg.Add(1)
		go func() {
			defer wg.Done()
			gw := g[lo*k : hi*k]
			for _, buf := range o.gbuf {
				floats.Add(gw, buf[lo*k:hi*k])
			}
			var reg float64
			if o.lambda != 0 {
				for j := lo; j < hi; j++ {
					lam := o.lamj[j]
					gj, uj := g[j*k:j*k+k], W[j*k:j*k+k]
					var r float64
					for c, v := range uj {
						gj[c] += lam * v
						r += v * v
					}
					reg += lam * r
				}
			}
			o.regs[c] = reg
		}()
	}
	wg.Wait()
	for _, r := range o.regs {
		f += 0.5 * r
	}
	return f
}
