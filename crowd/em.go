package crowd

import (
	"math"
	"runtime"
	"sort"
	"sync"
	"unsafe"
)

// The EM kernel shared by DawidSkene and OneCoin.
//
// Layout for speed at tens of millions of labels: annotators are cut into
// blocks whose tables fit in a core's cache, and labels are sorted by (block,
// item). One E-step sweeps the blocks, adding each label's row of log
// probabilities into its item's accumulator (items visited in increasing
// order, so the accumulator streams); the M-step sweeps again, adding each
// item's posterior into its annotator's count row. Items are split into one
// contiguous range per worker, so workers never write the same accumulator,
// and each worker has its own count table, summed after the sweep. A label
// is stored in 4 bytes: a 16-bit code (annotator-within-block × K + class)
// and the low 16 bits of its item; each block's labels are cut into chunks
// of 2¹⁶ items, which supply the upper bits. At K = 5 with float32 tables
// the two sweeps run in assembly on amd64 (rows_amd64.s: one 4-wide SSE add
// and one scalar add a label, no bounds checks; the indices are checked per
// chunk), and the E-step's normalisation and the M-step's logs use the
// table-driven expNeg and logPos. Profile on 40 million labels (1 million
// items, 100,000 annotators): the two sweeps take about three quarters of an
// iteration, the rest is normalisation (5 exps an item) and the M-step (25
// logs an annotator).

type float interface{ ~float32 | ~float64 }

// blockBytes is the cache budget for one block's log table plus one
// worker's count table (the E-step sweep reads the first, the M-step sweep
// writes the second). 1 MiB was fastest per CPU second of the sizes tried
// (256 KiB to 8 MiB) on the 40-million-label benchmark.
const blockBytes = 1 << 20

// A chunk is a run of one block's labels whose items share their upper
// bits: items base … base+2¹⁶−1, labels lab[lo:hi].
type chunk struct{ base, lo, hi int }

type emState[F float] struct {
	k, nA, nI int
	bsz       int         // annotators per block
	lab       []uint32    // labels sorted by (block, item): code<<16 | item mod 2¹⁶
	boff      []int       // block b's labels: boff[b]..boff[b+1]
	seg       [][][]chunk // per worker, per block: its labels by item chunk
	irange    [][2]int    // per worker: items
	nlab      []int32
	gold      []int
	logT      []F // [a][given c][true k]
	logPrior  []float64
	acc       []F         // nI×k: log accumulators, then posteriors
	counts    [][]F       // per worker, like logT
	prior     [][]float64 // per worker: Σ_i T_ik
	ll        []float64   // per worker
	mu        []float64   // hierarchical: prior means [a][t][c]
	hier      *HierPrior  // hierarchical: the last M-step's prior
	steps     int         // M-steps run
}

func runEM(method string, l *Labels, o Options) (*Result, error) {
	if err := checkInput(l, o); err != nil {
		return nil, err
	}
	if l.Len() >= float32Threshold {
		return emRun[float32](method, l, o)
	}
	return emRun[float64](method, l, o)
}

func newEMState[F float](l *Labels, gold []int, workers int) *emState[F] {
	k, n := l.NClasses, l.Len()
	var z F
	size := int(sizeOf(z))
	bsz := blockBytes / (2 * k * k * size)
	bsz = max(1, min(bsz, 65536/k))
	s := &emState[F]{k: k, nA: l.NAnnotators, nI: l.NItems, bsz: bsz, gold: gold,
		nlab: make([]int32, l.NItems)}
	nb := max(1, (l.NAnnotators+bsz-1)/bsz)
	// Counting sort by item (skipped when already sorted), then a stable
	// counting sort by block.
	sorted := true
	for j := 0; j < n; j++ {
		s.nlab[l.Item[j]]++
		if j > 0 && l.Item[j] < l.Item[j-1] {
			sorted = false
		}
	}
	var perm []int // int, not int32: more than 2³¹ labels may come unsorted
	if !sorted {
		start := make([]int, l.NItems+1)
		for i, c := range s.nlab {
			start[i+1] = start[i] + int(c)
		}
		perm = make([]int, n)
		for j := 0; j < n; j++ {
			i := l.Item[j]
			perm[start[i]] = j
			start[i]++
		}
	}
	s.boff = make([]int, nb+1)
	for _, a := range l.Annotator {
		s.boff[int(a)/bsz+1]++
	}
	for b := 0; b < nb; b++ {
		s.boff[b+1] += s.boff[b]
	}
	next := append([]int(nil), s.boff[:nb]...)
	item := make([]int32, n)
	s.lab = make([]uint32, n)
	for q := 0; q < n; q++ {
		j := q
		if perm != nil {
			j = perm[q]
		}
		a := int(l.Annotator[j])
		b := a / bsz
		p := next[b]
		next[b]++
		item[p] = l.Item[j]
		s.lab[p] = uint32((a-b*bsz)*k+int(l.Class[j]))<<16 | uint32(l.Item[j])&0xffff
	}
	perm = nil
	// Item ranges per worker, balanced by labels.
	w := max(1, min(workers, l.NItems))
	s.irange = make([][2]int, w)
	lo, cum := 0, 0
	for wk := 0; wk < w; wk++ {
		target := n * (wk + 1) / w
		hi := lo
		for hi < l.NItems && (cum < target || wk == w-1) {
			cum += int(s.nlab[hi])
			hi++
		}
		s.irange[wk] = [2]int{lo, hi}
		lo = hi
	}
	s.irange[w-1][1] = l.NItems
	s.seg = make([][][]chunk, w)
	for wk := range s.seg {
		s.seg[wk] = make([][]chunk, nb)
		for b := 0; b < nb; b++ {
			blk := item[s.boff[b]:s.boff[b+1]]
			first := func(i int) int {
				return s.boff[b] + sort.Search(len(blk), func(x int) bool { return int(blk[x]) >= i })
			}
			lo, hi := s.irange[wk][0], s.irange[wk][1]
			for c := lo >> 16; c<<16 < hi; c++ {
				a, e := first(max(lo, c<<16)), first(min(hi, (c+1)<<16))
				if a < e {
					s.seg[wk][b] = append(s.seg[wk][b], chunk{c << 16, a, e})
				}
			}
		}
	}
	item = nil
	// Tables padded to whole blocks, so every code of a block indexes its
	// block's part of them (the hot loops run without bounds checks).
	s.logT = make([]F, nb*bsz*k*k)
	s.logPrior = make([]float64, k)
	s.acc = make([]F, l.NItems*k)
	s.counts = make([][]F, w)
	s.prior = make([][]float64, w)
	s.ll = make([]float64, w)
	for wk := range w {
		s.counts[wk] = make([]F, nb*bsz*k*k)
		s.prior[wk] = make([]float64, k)
	}
	return s
}

func sizeOf[F float](z F) uintptr {
	if _, ok := any(z).(float32); ok {
		return 4
	}
	return 8
}

func emRun[F float](method string, l *Labels, o Options) (*Result, error) {
	k := l.NClasses
	maxIter := o.MaxIter
	if maxIter <= 0 {
		maxIter = defaultMaxIter
	}
	tol := o.Tol
	if tol == 0 {
		tol = defaultTol
	}
	workers := o.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	s := newEMState[F](l, o.Gold, workers)
	r := newResult(method, l, o)
	copy(r.NLabels, s.nlab)
	nItems := 0.0 // items with labels or gold
	for i := 0; i < l.NItems; i++ {
		if r.NLabels[i] > 0 || goldOf(o.Gold, i) >= 0 {
			nItems++
		}
	}
	// Initial M-step from label shares. The hierarchical model starts from
	// one-coin EM (warm iterations): from label shares alone, posteriors
	// are too soft for its skill spread to show (every annotator looks
	// alike and EM stays there).
	warm := 0
	step := method
	if method == MethodHierarchical {
		warm, step = min(hierWarm, maxIter-1), MethodOneCoin
	}
	s.run(func(wk int) { s.shares(wk); s.accumulate(wk) })
	s.mstep(step, o.Smoothing, nItems)
	prev := math.Inf(-1)
	for r.Iterations < maxIter {
		s.run(func(wk int) { s.estep(wk, nil); s.accumulate(wk) })
		r.Iterations++
		ll := s.sumLL()
		if r.Iterations > warm {
			step = method
		}
		s.mstep(step, o.Smoothing, nItems)
		if r.Iterations > warm+1 && math.Abs(ll-prev) < tol*max(1, math.Abs(ll)) {
			r.Converged = true
			break
		}
		prev = ll
	}
	// Final E-step at the final parameters, writing the posterior.
	s.run(func(wk int) { s.estep(wk, r.Posterior) })
	r.LogLik = s.sumLL()
	if s.hier != nil {
		s.hier.Skill = append([]float64(nil), s.hier.Skill...)
		r.Hier = s.hier
	}
	for c := 0; c < k; c++ {
		r.Prior[c] = math.Exp(s.logPrior[c])
	}
	normPrior(r.Prior, sum(r.Prior), 0)
	for i := 0; i < l.NItems; i++ {
		if r.NLabels[i] > 0 || goldOf(o.Gold, i) >= 0 {
			r.Class[i] = argmax(r.Row(i))
		}
	}
	fillNoLabels(r, o.Gold)
	// Confusion matrices from the tables (exp of the logs, undoing the floor).
	floor := floorFor[F]()
	for a := 0; a < s.nA; a++ {
		for t := 0; t < k; t++ {
			row := r.Confusion[(a*k+t)*k : (a*k+t+1)*k]
			var z float64
			for c := 0; c < k; c++ {
				p := math.Exp(float64(s.logT[(a*k+c)*k+t]))
				if p <= 2*floor {
					p = 0
				}
				row[c] = p
				z += p
			}
			for c := range row {
				if z > 0 {
					row[c] /= z
				} else {
					row[c] = 1 / float64(k)
				}
			}
		}
		var rel float64
		for t := 0; t < k; t++ {
			rel += r.Prior[t] * r.Confusion[(a*k+t)*k+t]
		}
		r.Reliability[a] = rel
	}
	return r, nil
}

func sum(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v
	}
	return s
}

func floorFor[F float]() float64 {
	var x F
	if _, ok := any(x).(float32); ok {
		return logFloorProbSmall
	}
	return logFloorProb
}

func (s *emState[F]) run(f func(wk int)) {
	if len(s.irange) == 1 {
		f(0)
		return
	}
	var wg sync.WaitGroup
	for wk := range s.irange {
		wg.Add(1)
		go func() { defer wg.Done(); f(wk) }()
	}
	wg.Wait()
}

func (s *emState[F]) sumLL() float64 {
	var t float64
	for _, v := range s.ll {
		t += v
	}
	return t
}

// shares sets the worker's items' posteriors to their share of labels per
// class (gold clamped): the start of EM (Dawid & Skene 1979, eq. 3.1).
func (s *emState[F]) shares(wk int) {
	k := s.k
	lo, hi := s.irange[wk][0], s.irange[wk][1]
	acc := s.acc[lo*k : hi*k]
	clear(acc)
	for b := range s.seg[wk] {
		for _, ch := range s.seg[wk][b] {
			for _, v := range s.lab[ch.lo:ch.hi] {
				s.acc[(ch.base+int(v&0xffff))*k+int(v>>16)%k]++
			}
		}
	}
	pr := s.prior[wk]
	clear(pr)
	for i := lo; i < hi; i++ {
		row := s.acc[i*k : (i+1)*k]
		if g := goldOf(s.gold, i); g >= 0 {
			clear(row)
			row[g] = 1
		} else if n := s.nlab[i]; n > 0 {
			inv := 1 / F(n)
			for c := range row {
				row[c] *= inv
			}
		}
		for c, v := range row {
			pr[c] += float64(v)
		}
	}
}

// estep computes the worker's items' posteriors into acc, its part of the
// log-likelihood into ll and its prior sums into prior; when post is not nil
// it also writes the posteriors there (items with no labels: the prior).
func (s *emState[F]) estep(wk int, post []float64) {
	k := s.k
	lo, hi := s.irange[wk][0], s.irange[wk][1]
	for i := lo; i < hi; i++ {
		row := s.acc[i*k : (i+1)*k]
		for c := range row {
			row[c] = F(s.logPrior[c])
		}
	}
	for b := range s.seg[wk] {
		base := b * s.bsz * k * k
		lt := s.logT[base:min(len(s.logT), base+s.bsz*k*k)]
		for _, ch := range s.seg[wk][b] {
			lab := s.lab[ch.lo:ch.hi]
			acc := s.acc[ch.base*k:]
			if k == 5 {
				gatherAdd5(acc, lt, lab, s.bsz*k)
				continue
			}
			for _, v := range lab {
				o := int(v>>16) * k
				d := int(v&0xffff) * k
				src := lt[o : o+k : o+k]
				dst := acc[d : d+k : d+k]
				for c := range dst {
					dst[c] += src[c]
				}
			}
		}
	}
	pr := s.prior[wk]
	clear(pr)
	var ll float64
	prod := 1.0 // Π z over items since ll was last updated: one log per hundreds of items
	fast := isFloat32[F]()
	sc := make([]float64, k)
	// The common case unrolled (k = 5, float32 tables, no gold, not the
	// final pass): the same operations in the same order as the loop below,
	// the prior sums kept in registers (pr is only touched here then).
	k5 := k == 5 && fast && s.gold == nil && post == nil
	var p0, p1, p2, p3, p4 float64
	for i := lo; i < hi; i++ {
		if k5 && s.nlab[i] > 0 {
			r := (*[5]F)(s.acc[i*5 : i*5+5])
			v0, v1, v2, v3, v4 := float64(r[0]), float64(r[1]), float64(r[2]), float64(r[3]), float64(r[4])
			m := max(v0, v1, v2, v3, v4)
			e0, e1, e2, e3, e4 := expNeg(v0-m), expNeg(v1-m), expNeg(v2-m), expNeg(v3-m), expNeg(v4-m)
			z := e0 + e1 + e2 + e3 + e4
			ll += m
			if prod *= z; prod > 1e200 {
				ll += math.Log(prod)
				prod = 1
			}
			inv := 1 / z
			e0, e1, e2, e3, e4 = e0*inv, e1*inv, e2*inv, e3*inv, e4*inv
			r[0], r[1], r[2], r[3], r[4] = F(e0), F(e1), F(e2), F(e3), F(e4)
			p0, p1, p2, p3, p4 = p0+e0, p1+e1, p2+e2, p3+e3, p4+e4
			continue
		}
		row := s.acc[i*k : (i+1)*k]
		g := goldOf(s.gold, i)
		if s.nlab[i] == 0 && g < 0 {
			for c := range row {
				row[c] = 0 // no labels: no weight in the M-step
			}
			if post != nil {
				p := post[i*k : (i+1)*k]
				for c := range p {
					p[c] = math.Exp(s.logPrior[c])
				}
			}
			continue
		}
		m := math.Inf(-1)
		for c, v := range row {
			sc[c] = float64(v)
			m = max(m, sc[c])
		}
		if g >= 0 {
			ll += sc[g] // complete-data term of a clamped item: log p_g + Σ log π_a[g][c]
			for c := range row {
				row[c] = 0
			}
			row[g] = 1
			pr[g]++
		} else {
			var z float64
			if fast {
				for c, v := range sc {
					e := expNeg(v - m)
					sc[c] = e
					z += e
				}
			} else {
				for c, v := range sc {
					e := math.Exp(v - m)
					sc[c] = e
					z += e
				}
			}
			ll += m
			if prod *= z; prod > 1e200 {
				ll += math.Log(prod)
				prod = 1
			}
			inv := 1 / z
			for c := range row {
				p := sc[c] * inv
				row[c] = F(p)
				pr[c] += p
			}
		}
		if post != nil {
			p := post[i*k : (i+1)*k]
			for c := range p {
				p[c] = float64(row[c])
			}
		}
	}
	if k5 {
		pr[0], pr[1], pr[2], pr[3], pr[4] = p0, p1, p2, p3, p4
	}
	s.ll[wk] = ll + math.Log(prod)
}

func isFloat32[F float]() bool {
	var x F
	_, ok := any(x).(float32)
	return ok
}

// expNeg is e^x for x ≤ 0 with a relative error below 1e-10 (the float32
// tables need 2e-7): with N = round(64·x/ln 2) and r = x − N·ln2/64
// (|r| ≤ ln2/128), e^x = 2^⌊N/64⌋ · 2^((N mod 64)/64) · e^r, the middle
// factor from a table and e^r by its Taylor series to degree 4. Below
// x = −707.7 (under the smallest normal float64) it returns 0, within 1e-307
// of the truth.
func expNeg(x float64) float64 {
	t := x * (64 / math.Ln2)
	if t < -1021*64 {
		return 0
	}
	const shift = 0x1.8p52 // adding and subtracting it rounds to an integer
	nf := (t + shift) - shift
	n := int64(nf)
	r := x - nf*(math.Ln2/64)
	p := 1 + r*(1+r*(1.0/2+r*(1.0/6+r*(1.0/24))))
	return p * exp2Tab[n&63] * math.Float64frombits(uint64((n>>6)+1023)<<52)
}

// exp2Tab[j] = 2^(j/64).
var exp2Tab = func() (t [64]float64) {
	for j := range t {
		t[j] = math.Exp2(float64(j) / 64)
	}
	return
}()

// logPos is ln x for a normal x > 0 with an absolute error below 1e-11
// (the float32 tables need about 1e-7): x = 2^e · m with m in [1, 2), m
// rounded down to c = 1 + j/128, ln x = e·ln 2 + ln c + ln(1 + r) with
// r = m/c − 1 in [0, 1/128), ln(1 + r) by its series to degree 5.
func logPos(x float64) float64 {
	b := math.Float64bits(x)
	e := int64(b>>52) - 1023
	j := (b >> 45) & 127
	m := math.Float64frombits(b&(1<<52-1) | 1023<<52)
	r := m*logInvTab[j] - 1
	l := r * (1 - r*(1.0/2-r*(1.0/3-r*(1.0/4-r*(1.0/5)))))
	return float64(e)*math.Ln2 + logTab[j] + l
}

// logInvTab[j] = 1/(1 + j/128), logTab[j] = ln(1 + j/128).
var logInvTab, logTab = func() (inv, lg [128]float64) {
	for j := range inv {
		c := 1 + float64(j)/128
		inv[j], lg[j] = 1/c, math.Log(c)
	}
	return
}()

// accumulate adds each label's item posterior into the worker's count table.
func (s *emState[F]) accumulate(wk int) {
	k := s.k
	cnt := s.counts[wk]
	clear(cnt)
	for b := range s.seg[wk] {
		base := b * s.bsz * k * k
		cb := cnt[base:min(len(cnt), base+s.bsz*k*k)]
		for _, ch := range s.seg[wk][b] {
			lab := s.lab[ch.lo:ch.hi]
			acc := s.acc[ch.base*k:]
			if k == 5 {
				scatterAdd5(cb, acc, lab, s.bsz*k)
				continue
			}
			for _, v := range lab {
				o := int(v>>16) * k
				d := int(v&0xffff) * k
				src := acc[d : d+k : d+k]
				dst := cb[o : o+k : o+k]
				for c := range dst {
					dst[c] += src[c]
				}
			}
		}
	}
}

// mstep reduces the workers' accumulators into a new prior and new log
// tables; the workers share the annotators between them.
func (s *emState[F]) mstep(method string, alpha, nItems float64) {
	k := s.k
	pr := s.prior[0]
	for _, o := range s.prior[1:] {
		for c, v := range o {
			pr[c] += v
		}
	}
	p := append([]float64(nil), pr...)
	normPrior(p, nItems, alpha)
	floor := floorFor[F]()
	for c := range p {
		s.logPrior[c] = math.Log(max(p[c], floor))
	}
	w := len(s.irange)
	s.run(func(wk int) {
		a0, a1 := s.nA*wk/w, s.nA*(wk+1)/w
		cnt := s.counts[0][a0*k*k : a1*k*k]
		for _, o := range s.counts[1:] {
			for j, v := range o[a0*k*k : a1*k*k] {
				cnt[j] += v
			}
		}
		if method != MethodHierarchical {
			s.mstepRange(method, alpha, a0, a1)
		}
	})
	if method == MethodHierarchical {
		if s.mu == nil {
			s.mu = make([]float64, s.nA*k*k)
		}
		s.hier = hierMstep(s.counts[0][:s.nA*k*k], s.nA, k, p, s.mu, w, s.hier, s.steps)
		s.steps++
		s.run(func(wk int) { s.mstepRange(method, alpha, s.nA*wk/w, s.nA*(wk+1)/w) })
	}
}

func (s *emState[F]) mstepRange(method string, alpha float64, a0, a1 int) {
	k := s.k
	cnt := s.counts[0]
	floor := floorFor[F]()
	uni := F(math.Log(1 / float64(k)))
	fast := isFloat32[F]()
	rowSum := make([]float64, k)
	for a := a0; a < a1; a++ {
		blk := cnt[a*k*k : (a+1)*k*k]
		lt := s.logT[a*k*k : (a+1)*k*k]
		if method == MethodHierarchical {
			m := s.mu[a*k*k : (a+1)*k*k]
			b := s.hier.Beta
			for t := 0; t < k; t++ {
				var n float64
				for c := 0; c < k; c++ {
					n += float64(blk[c*k+t])
				}
				for c := 0; c < k; c++ {
					// logPos (absolute error below 1e-11) in both precisions:
					// no published table is reproduced with this model.
					q := max((float64(blk[c*k+t])+b*m[t*k+c])/(n+b), floor)
					lt[c*k+t] = F(logPos(q))
				}
			}
			continue
		}
		if method == MethodOneCoin {
			var diag, tot float64
			for c := 0; c < k; c++ {
				for t := 0; t < k; t++ {
					v := float64(blk[c*k+t])
					tot += v
					if c == t {
						diag += v
					}
				}
			}
			q := 1 / float64(k)
			if tot+2*alpha > 0 {
				q = (diag + alpha) / (tot + 2*alpha)
			}
			on := F(math.Log(max(q, floor)))
			off := F(math.Log(max((1-q)/float64(k-1), floor)))
			for c := 0; c < k; c++ {
				for t := 0; t < k; t++ {
					if c == t {
						lt[c*k+t] = on
					} else {
						lt[c*k+t] = off
					}
				}
			}
			continue
		}
		clear(rowSum)
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				rowSum[t] += float64(blk[c*k+t]) + alpha
			}
		}
		for c := 0; c < k; c++ {
			for t := 0; t < k; t++ {
				if rowSum[t] <= 0 {
					lt[c*k+t] = uni
					continue
				}
				q := max((float64(blk[c*k+t])+alpha)/rowSum[t], floor)
				if fast {
					lt[c*k+t] = F(logPos(q))
				} else {
					lt[c*k+t] = F(math.Log(q))
				}
			}
		}
	}
}

// gatherAdd5 adds, for every label v, row code = v>>16 of src to row
// item = v&0xffff of dst, rows 5 wide: dst[5·item+c] += src[5·code+c]. The
// labels are sorted by item. It panics unless every row lies inside its
// slice (codes below maxCode); the loop itself runs without bounds checks
// (the hot loop of the E-step).
func gatherAdd5[F float](dst, src []F, lab []uint32, maxCode int) {
	checkRows5(len(dst), len(src), maxCode, lab)
	if len(lab) == 0 {
		return
	}
	if d32, ok := any(dst).([]float32); ok && haveRows5Asm {
		gatherAdd5f32(&d32[0], &any(src).([]float32)[0], &lab[0], len(lab))
		return
	}
	var z F
	sz := unsafe.Sizeof(z)
	d0, s0 := unsafe.Pointer(unsafe.SliceData(dst)), unsafe.Pointer(unsafe.SliceData(src))
	lp := unsafe.Pointer(unsafe.SliceData(lab))
	for j := 0; j < len(lab); j++ {
		v := *(*uint32)(unsafe.Add(lp, 4*j))
		d := (*[5]F)(unsafe.Add(d0, uintptr(v&0xffff)*5*sz))
		s := (*[5]F)(unsafe.Add(s0, uintptr(v>>16)*5*sz))
		d[0] += s[0]
		d[1] += s[1]
		d[2] += s[2]
		d[3] += s[3]
		d[4] += s[4]
	}
}

// scatterAdd5 adds, for every label v, row item = v&0xffff of src to row
// code = v>>16 of dst, rows 5 wide: dst[5·code+c] += src[5·item+c]; the
// M-step's hot loop, with the same checks as gatherAdd5.
func scatterAdd5[F float](dst, src []F, lab []uint32, maxCode int) {
	checkRows5(len(src), len(dst), maxCode, lab)
	if len(lab) == 0 {
		return
	}
	if d32, ok := any(dst).([]float32); ok && haveRows5Asm {
		scatterAdd5f32(&d32[0], &any(src).([]float32)[0], &lab[0], len(lab))
		return
	}
	var z F
	sz := unsafe.Sizeof(z)
	d0, s0 := unsafe.Pointer(unsafe.SliceData(dst)), unsafe.Pointer(unsafe.SliceData(src))
	lp := unsafe.Pointer(unsafe.SliceData(lab))
	for j := 0; j < len(lab); j++ {
		v := *(*uint32)(unsafe.Add(lp, 4*j))
		s := (*[5]F)(unsafe.Add(s0, uintptr(v&0xffff)*5*sz))
		d := (*[5]F)(unsafe.Add(d0, uintptr(v>>16)*5*sz))
		d[0] += s[0]
		d[1] += s[1]
		d[2] += s[2]
		d[3] += s[3]
		d[4] += s[4]
	}
}

// checkRows5 panics unless the labels' items (sorted, so the largest is the
// last label's) index 5-wide rows of a slice of length nItem and every code
// below maxCode (the block size × k, by construction) a 5-wide row of one
// of length nCode.
func checkRows5(nItem, nCode, maxCode int, lab []uint32) {
	if len(lab) == 0 {
		return
	}
	if last := int(lab[len(lab)-1] & 0xffff); 5*last+5 > nItem || int(lab[0]&0xffff) > last {
		panic("crowd: label item outside the accumulator")
	}
	if 5*maxCode > nCode || maxCode > 1<<16 {
		panic("crowd: table shorter than a block")
	}
}
