package selector

import (
	"fmt"
	"math"

	"handoff/features"
)

// Metric names a distance between feature rows for diversity.
type Metric string

// The diversity metrics. The zero value turns diversity off.
const (
	NoDiversity Metric = ""
	Cosine      Metric = "cosine"    // 1 − a·b / (‖a‖‖b‖); 1 when either row is all zero
	Euclidean   Metric = "euclidean" // ‖a − b‖
)

// dot returns the inner product of two rows of the same matrix (both sparse
// with increasing indices, or both dense).
func dot(ai []int32, av []float64, bi []int32, bv []float64) float64 {
	s := 0.0
	if ai == nil && bi == nil {
		for j := range av {
			s += av[j] * bv[j]
		}
		return s
	}
	if ai == nil || bi == nil {
		panic("selector: mixing dense and sparse rows")
	}
	i, j := 0, 0
	for i < len(ai) && j < len(bi) {
		switch {
		case ai[i] == bi[j]:
			s += av[i] * bv[j]
			i++
			j++
		case ai[i] < bi[j]:
			i++
		default:
			j++
		}
	}
	return s
}

func norm2(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return s
}

func checkRow(x features.Matrix, i int) error {
	_, v := x.Row(i)
	for j, f := range v {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return fmt.Errorf("feature row %d: entry %d is %v", i, j, f)
		}
	}
	return nil
}

// Density returns, for each row i in rows, the mean cosine similarity of x_i
// to the rows of pool (Settles & Craven 2008, "information density"):
//
//	d(i) = (1/|P|) Σ_{u∈P} cos(x_i, x_u) = (x_i/‖x_i‖) · (1/|P|) Σ_{u∈P} x_u/‖x_u‖
//
// computed exactly through the mean of the unit-length pool rows, so the cost
// is linear in the stored entries and no sampling of the pool is needed.
// Negative means are clamped to 0; all-zero rows have similarity 0 to
// everything. pool == nil means all rows of x.
func Density(x features.Matrix, rows, pool []int) ([]float64, error) {
	centre := make([]float64, x.Cols())
	np := 0
	add := func(u int) error {
		if err := checkRow(x, u); err != nil {
			return err
		}
		idx, val := x.Row(u)
		n := math.Sqrt(norm2(val))
		np++
		if n == 0 {
			return nil
		}
		if idx == nil {
			for j, v := range val {
				centre[j] += v / n
			}
		} else {
			for k, j := range idx {
				centre[j] += val[k] / n
			}
		}
		return nil
	}
	if pool == nil {
		for u := 0; u < x.Rows(); u++ {
			if err := add(u); err != nil {
				return nil, err
			}
		}
	} else {
		for _, u := range pool {
			if err := add(u); err != nil {
				return nil, err
			}
		}
	}
	if np == 0 {
		return nil, fmt.Errorf("density: empty pool")
	}
	out := make([]float64, len(rows))
	for k, i := range rows {
		if err := checkRow(x, i); err != nil {
			return nil, err
		}
		idx, val := x.Row(i)
		n := math.Sqrt(norm2(val))
		if n == 0 {
			continue
		}
		s := 0.0
		if idx == nil {
			for j, v := range val {
				s += v * centre[j]
			}
		} else {
			for m, j := range idx {
				s += val[m] * centre[j]
			}
		}
		out[k] = math.Max(0, s/(n*float64(np)))
	}
	return out, nil
}

// KCenter picks k of the candidate rows by greedy k-centre (Gonzalez 1985;
// Sener & Savarese 2018, "core-set"): it starts from cand[0] (pass the
// candidates best first) and then repeatedly adds the candidate whose
// distance to its nearest chosen row is largest, ties going to the earlier
// candidate. centres, if given, are rows already chosen or labelled that the
// batch should stay away from; they are never returned. It returns positions
// into cand, in the order picked; k > len(cand) returns all of them.
func KCenter(x features.Matrix, cand []int, k int, metric Metric, centres []int) ([]int, error) {
	if metric != Cosine && metric != Euclidean {
		return nil, fmt.Errorf("diversity metric: unknown %q (want cosine or euclidean)", metric)
	}
	if k > len(cand) {
		k = len(cand)
	}
	if k <= 0 {
		return nil, nil
	}
	norms := make([]float64, len(cand))
	for c, i := range cand {
		if err := checkRow(x, i); err != nil {
			return nil, err
		}
		_, v := x.Row(i)
		norms[c] = norm2(v)
	}
	dist := func(c int, j int, nj float64) float64 {
		ai, av := x.Row(cand[c])
		bi, bv := x.Row(j)
		d := dot(ai, av, bi, bv)
		if metric == Cosine {
			if norms[c] == 0 || nj == 0 {
				return 1
			}
			return 1 - d/math.Sqrt(norms[c]*nj)
		}
		return math.Sqrt(math.Max(0, norms[c]+nj-2*d))
	}
	minD := make([]float64, len(cand))
	for c := range minD {
		minD[c] = math.Inf(1)
	}
	update := func(j int) {
		_, v := x.Row(j)
		nj := norm2(v)
		for c := range cand {
			if d := dist(c, j, nj); d < minD[c] {
				minD[c] = d
			}
		}
	}
	for _, j := range centres {
		update(j)
	}
	taken := make([]bool, len(cand))
	out := make([]int, 0, k)
	first := 0
	if len(centres) > 0 {
		first = argmaxFree(minD, taken)
	}
	for len(out) < k {
		c := first
		if len(out) > 0 {
			c = argmaxFree(minD, taken)
		}
		taken[c] = true
		out = append(out, c)
		update(cand[c])
	}
	return out, nil
}

func argmaxFree(d []float64, taken []bool) int {
	best := -1
	for c, v := range d {
		if taken[c] {
			continue
		}
		if best < 0 || v > d[best] {
			best = c
		}
	}
	return best
}
