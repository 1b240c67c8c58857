package learner

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync"

	"handoff/features"
)

// Forest configures a random forest of CART classification trees
// (Breiman 2001) for dense features such as hand-crafted image features.
//
// Each tree is grown on a bootstrap sample of the rows (n draws with
// replacement) and at each node picks the best split among MaxFeatures
// columns drawn without replacement, by the decrease in Gini impurity
// 1 − Σ_c (m_c / m)², where m_c is the node's mass of class c: soft targets
// and row weights enter as fractional class mass, m_c = Σ_i b_i w_i t_ic,
// b_i being the row's bootstrap count. A leaf predicts its normalised class
// masses; the forest averages its trees' predictions.
//
// Tree t draws its randomness from a PCG generator seeded with (Seed, t),
// so the forest is the same for a given Seed whatever Threads is.
//
// We wrote this forest rather than use github.com/sjwhitworth/golearn's
// ensemble.RandomForest: golearn trains on a base.FixedDataGrid whose class
// is one categorical attribute, so it cannot take soft targets or row
// weights, and its bagging draws from the global math/rand source in
// several goroutines, so a forest cannot be reproduced from a seed.
type Forest struct {
	// Trees is the number of trees; 0 means 100.
	Trees int
	// MaxFeatures is the number of columns tried at each split; 0 means
	// ⌊√D⌋ (at least 1).
	MaxFeatures int
	// MinLeaf is the least number of distinct rows in a leaf; 0 means 1.
	MinLeaf int
	// MaxDepth caps the depth of a tree; 0 means no cap.
	MaxDepth int
	// Seed seeds the bootstrap samples and column draws.
	Seed uint64
	// Threads is the number of goroutines growing trees and predicting;
	// 0 means GOMAXPROCS.
	Threads int
}

// Tree is one fitted CART tree stored as flat arrays. Node 0 is the root.
// For an inner node n, rows with x[Feature[n]] <= Threshold[n] go to
// Left[n], the others to Right[n]. For a leaf Feature[n] is −1 and
// Prob[Left[n]*K : Left[n]*K+K] holds its class probabilities.
type Tree struct {
	Feature   []int32
	Threshold []float64
	Left      []int32
	Right     []int32
	Prob      []float64
}

// ForestModel is a fitted random forest.
type ForestModel struct {
	Config Forest
	K, D   int
	Trees  []Tree
}

// Fit grows the forest; see Learner for the rules on its arguments. X may
// be sparse; it is read into a dense copy.
func (f Forest) Fit(X features.Matrix, targets [][]float64, weights []float64) (Model, error) {
	if f.Trees < 0 || f.MaxFeatures < 0 || f.MinLeaf < 0 || f.MaxDepth < 0 {
		return nil, fmt.Errorf("learner: forest Trees, MaxFeatures, MinLeaf and MaxDepth must be ≥ 0")
	}
	k, err := validate(X, targets, weights, false)
	if err != nil {
		return nil, err
	}
	n, d := X.Rows(), X.Cols()
	cfg := f
	if cfg.Trees == 0 {
		cfg.Trees = 100
	}
	if cfg.MaxFeatures == 0 {
		cfg.MaxFeatures = max(1, int(math.Sqrt(float64(d))))
	}
	if cfg.MaxFeatures > d {
		cfg.MaxFeatures = d
	}
	if cfg.MinLeaf == 0 {
		cfg.MinLeaf = 1
	}
	// Column-major dense copy: feature j of row i at cols[j*n+i].
	cols := make([]float64, n*d)
	for i := 0; i < n; i++ {
		idx, val := X.Row(i)
		for p, v := range val {
			j := p
			if idx != nil {
				j = int(idx[p])
			}
			cols[j*n+i] = v
		}
	}
	mass := make([]float64, n*k)
	for i := 0; i < n; i++ {
		w := 1.0
		if weights != nil {
			w = weights[i]
		}
		for c, t := range targets[i] {
			mass[i*k+c] = w * t
		}
	}
	m := &ForestModel{Config: cfg, K: k, D: d, Trees: make([]Tree, cfg.Trees)}
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < threads(cfg.Threads); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			g := &grower{cfg: cfg, n: n, d: d, k: k, cols: cols, mass: mass}
			for t := range next {
				g.rng = rand.New(rand.NewPCG(cfg.Seed, uint64(t)))
				m.Trees[t] = g.grow()
			}
		}()
	}
	for t := 0; t < cfg.Trees; t++ {
		next <- t
	}
	close(next)
	wg.Wait()
	return m, nil
}

// grower grows one tree at a time.
type grower struct {
	cfg     Forest
	n, d, k int
	cols    []float64
	mass    []float64
	rng     *rand.Rand

	rows  []int32   // in-bag rows, partitioned per node
	bmass []float64 // bootstrap-weighted class mass per in-bag row
	tree  Tree
	order []int32
	left  []float64
	total []float64
	feats []int
}

type span struct {
	lo, hi int
	node   int32
	depth  int
}

func (g *grower) grow() Tree {
	n, k := g.n, g.k
	count := make([]int32, n)
	for range n {
		count[g.rng.IntN(n)]++
	}
	g.rows = g.rows[:0]
	g.bmass = make([]float64, n*k)
	for i, c := range count {
		if c > 0 {
			g.rows = append(g.rows, int32(i))
			for cl := 0; cl < k; cl++ {
				g.bmass[i*k+cl] = float64(c) * g.mass[i*k+cl]
			}
		}
	}
	g.tree = Tree{}
	g.left = make([]float64, k)
	g.total = make([]float64, k)
	g.feats = make([]int, g.d)
	for j := range g.feats {
		g.feats[j] = j
	}
	stack := []span{{0, len(g.rows), g.newNode(), 0}}
	for len(stack) > 0 {
		s := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		feat, thr, cut := g.split(s)
		if feat < 0 {
			g.makeLeaf(s)
			continue
		}
		l, r := g.newNode(), g.newNode()
		g.tree.Feature[s.node] = int32(feat)
		g.tree.Threshold[s.node] = thr
		g.tree.Left[s.node], g.tree.Right[s.node] = l, r
		stack = append(stack, span{cut, s.hi, r, s.depth + 1}, span{s.lo, cut, l, s.depth + 1})
	}
	return g.tree
}

func (g *grower) newNode() int32 {
	t := &g.tree
	t.Feature = append(t.Feature, -1)
	t.Threshold = append(t.Threshold, 0)
	t.Left = append(t.Left, -1)
	t.Right = append(t.Right, -1)
	return int32(len(t.Feature) - 1)
}

func (g *grower) makeLeaf(s span) {
	k := g.k
	clear(g.total)
	var m float64
	for _, i := range g.rows[s.lo:s.hi] {
		for c := 0; c < k; c++ {
			g.total[c] += g.bmass[int(i)*k+c]
		}
	}
	for _, v := range g.total {
		m += v
	}
	leaf := int32(len(g.tree.Prob) / k)
	for c := 0; c < k; c++ {
		p := 1 / float64(k) // a node of zero mass (all weights 0) predicts uniform
		if m > 0 {
			p = g.total[c] / m
		}
		g.tree.Prob = append(g.tree.Prob, p)
	}
	g.tree.Left[s.node] = leaf
}

// gini returns m·(1 − Σ (m_c/m)²) = m − Σ m_c²/m, the mass-weighted impurity.
func gini(mc []float64, m float64) float64 {
	if m <= 0 {
		return 0
	}
	var s float64
	for _, v := range mc {
		s += v * v
	}
	return m - s/m
}

// split finds the best split of the node's rows or returns feat −1. On
// success the rows are partitioned so that [lo, cut) go left.
func (g *grower) split(s span) (feat int, thr float64, cut int) {
	k, n := g.k, g.n
	rows := g.rows[s.lo:s.hi]
	if len(rows) < 2*g.cfg.MinLeaf || (g.cfg.MaxDepth > 0 && s.depth >= g.cfg.MaxDepth) {
		return -1, 0, 0
	}
	clear(g.total)
	for _, i := range rows {
		for c := 0; c < k; c++ {
			g.total[c] += g.bmass[int(i)*k+c]
		}
	}
	var m float64
	nonzero := 0
	for _, v := range g.total {
		m += v
		if v > 0 {
			nonzero++
		}
	}
	if nonzero <= 1 {
		return -1, 0, 0 // pure node
	}
	parent := gini(g.total, m)
	best := parent * (1 - 1e-12)
	feat = -1
	// Partial Fisher–Yates: the first MaxFeatures of g.feats are the draw.
	// Like scikit-learn, keep drawing past MaxFeatures while no column has
	// given a valid split, so a node is only a leaf if no column splits it.
	g.order = append(g.order[:0], rows...)
	for f := 0; f < g.d; f++ {
		if f >= g.cfg.MaxFeatures && feat >= 0 {
			break
		}
		r := f + g.rng.IntN(g.d-f)
		g.feats[f], g.feats[r] = g.feats[r], g.feats[f]
		j := g.feats[f]
		col := g.cols[j*n : (j+1)*n]
		slices.SortFunc(g.order, func(a, b int32) int {
			switch va, vb := col[a], col[b]; {
			case va < vb:
				return -1
			case va > vb:
				return 1
			}
			return int(a - b)
		})
		if col[g.order[0]] == col[g.order[len(g.order)-1]] {
			continue // constant here
		}
		clear(g.left)
		var ml float64
		for p := 0; p+1 < len(g.order); p++ {
			i := int(g.order[p])
			for c := 0; c < k; c++ {
				g.left[c] += g.bmass[i*k+c]
				ml += g.bmass[i*k+c]
			}
			v, vn := col[i], col[g.order[p+1]]
			if v == vn || p+1 < g.cfg.MinLeaf || len(g.order)-p-1 < g.cfg.MinLeaf {
				continue
			}
			var right float64
			var sl, sr float64
			for c := 0; c < k; c++ {
				rc := g.total[c] - g.left[c]
				sl += g.left[c] * g.left[c]
				sr += rc * rc
			}
			right = m - ml
			imp := 0.0
			if ml > 0 {
				imp += ml - sl/ml
			}
			if right > 0 {
				imp += right - sr/right
			}
			if imp < best {
				best, feat, thr = imp, j, v+(vn-v)/2
				if thr == vn { // midpoint rounded up to vn
					thr = v
				}
			}
		}
	}
	if feat < 0 {
		return -1, 0, 0
	}
	col := g.cols[feat*n : (feat+1)*n]
	a, b := s.lo, s.hi-1
	for a <= b {
		if col[g.rows[a]] <= thr {
			a++
		} else {
			g.rows[a], g.rows[b] = g.rows[b], g.rows[a]
			b--
		}
	}
	return feat, thr, a
}

// Classes returns the number of classes.
func (m *ForestModel) Classes() int { return m.K }

// PredictProba returns the forest's mean leaf probabilities for every row.
func (m *ForestModel) PredictProba(X features.Matrix) [][]float64 { return predictRows(m, X) }

// PredictProbaInto writes the forest's mean leaf probabilities for every row
// of X into dst (row-major).
func (m *ForestModel) PredictProbaInto(dst []float64, X features.Matrix) {
	n, k, d := X.Rows(), m.K, m.D
	if len(dst) != n*k {
		panic(fmt.Sprintf("learner: dst has length %d, want %d rows × %d classes", len(dst), n, k))
	}
	if X.Cols() != d {
		panic(fmt.Sprintf("learner: matrix has %d columns, the model was trained on %d", X.Cols(), d))
	}
	inv := 1 / float64(len(m.Trees))
	parallelRows(n, threads(m.Config.Threads), func(lo, hi int) {
		row := make([]float64, d)
		for i := lo; i < hi; i++ {
			idx, val := X.Row(i)
			x := val
			if idx != nil {
				clear(row)
				for p, v := range val {
					row[idx[p]] = v
				}
				x = row
			}
			out := dst[i*k : (i+1)*k]
			clear(out)
			for t := range m.Trees {
				tr := &m.Trees[t]
				nd := int32(0)
				for tr.Feature[nd] >= 0 {
					if x[tr.Feature[nd]] <= tr.Threshold[nd] {
						nd = tr.Left[nd]
					} else {
						nd = tr.Right[nd]
					}
				}
				l := int(tr.Left[nd]) * k
				axpy(out, inv, tr.Prob[l:l+k])
			}
		}
	})
}
