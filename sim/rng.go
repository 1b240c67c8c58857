package sim

import (
	"hash/fnv"
	"math"
	"math/rand/v2"
)

// mix64 is the SplitMix64 finaliser; it turns related seeds into unrelated ones.
func mix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// derive combines a seed with further keys into a new seed.
func derive(seed uint64, keys ...uint64) uint64 {
	h := mix64(seed)
	for _, k := range keys {
		h = mix64(h ^ mix64(k+0x632be59bd9b4e019))
	}
	return h
}

// hashString is FNV-1a of s.
func hashString(s string) uint64 {
	h := fnv.New64a()
	h.Write([]byte(s))
	return h.Sum64()
}

// newRand returns a PCG generator seeded from seed and keys.
func newRand(seed uint64, keys ...uint64) *rand.Rand {
	s := derive(seed, keys...)
	return rand.New(rand.NewPCG(s, mix64(s^0xda942042e4dd58b5)))
}

// pick returns a uniformly chosen element of xs.
func pick[T any](r *rand.Rand, xs []T) T { return xs[r.IntN(len(xs))] }

// categorical draws an index with probability proportional to w.
func categorical(r *rand.Rand, w []float64) int {
	var sum float64
	for _, v := range w {
		sum += v
	}
	u := r.Float64() * sum
	for i, v := range w {
		u -= v
		if u < 0 {
			return i
		}
	}
	for i := len(w) - 1; i >= 0; i-- {
		if w[i] > 0 {
			return i
		}
	}
	return len(w) - 1
}

// lognormal draws exp(N(log(median), sigma²)).
func lognormal(r *rand.Rand, median, sigma float64) float64 {
	return median * math.Exp(sigma*r.NormFloat64())
}

// clamp limits x to [lo, hi].
func clamp(x, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, x)) }

// allocate splits n into len(shares) whole counts proportional to shares by
// the largest-remainder method (ties go to the earlier share), so the counts
// sum to n and each is within one of n·share.
func allocate(n int, shares []float64) []int {
	var sum float64
	for _, s := range shares {
		sum += s
	}
	counts := make([]int, len(shares))
	if sum <= 0 || n <= 0 {
		return counts
	}
	rem := make([]float64, len(shares))
	left := n
	for i, s := range shares {
		x := float64(n) * s / sum
		counts[i] = int(math.Floor(x))
		rem[i] = x - float64(counts[i])
		left -= counts[i]
	}
	for ; left > 0; left-- {
		best := 0
		for i := range rem {
			if rem[i] > rem[best] {
				best = i
			}
		}
		counts[best]++
		rem[best] = -1
	}
	return counts
}

// aliasTable draws indices with probability proportional to fixed weights in
// O(1) per draw (Vose's alias method).
type aliasTable struct {
	prob  []float64
	alias []int32
}

func newAliasTable(w []float64) *aliasTable {
	n := len(w)
	var sum float64
	for _, v := range w {
		sum += v
	}
	t := &aliasTable{prob: make([]float64, n), alias: make([]int32, n)}
	scaled := make([]float64, n)
	var small, large []int32
	for i, v := range w {
		scaled[i] = v * float64(n) / sum
		if scaled[i] < 1 {
			small = append(small, int32(i))
		} else {
			large = append(large, int32(i))
		}
	}
	for len(small) > 0 && len(large) > 0 {
		s, l := small[len(small)-1], large[len(large)-1]
		small = small[:len(small)-1]
		t.prob[s], t.alias[s] = scaled[s], l
		scaled[l] -= 1 - scaled[s]
		if scaled[l] < 1 {
			large = large[:len(large)-1]
			small = append(small, l)
		}
	}
	for _, i := range append(small, large...) {
		t.prob[i], t.alias[i] = 1, i
	}
	return t
}

func (t *aliasTable) draw(r *rand.Rand) int {
	i := r.IntN(len(t.prob))
	if r.Float64() < t.prob[i] {
		return i
	}
	return int(t.alias[i])
}
