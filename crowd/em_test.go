package crowd

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestExpNeg(t *testing.T) {
	for x := 0.0; x > -707; x -= 0.0137 {
		want := math.Exp(x)
		got := expNeg(x)
		if math.Abs(got-want) > 2e-7*want {
			t.Fatalf("expNeg(%v) = %v, want %v", x, got, want)
		}
	}
	if expNeg(-1e6) != 0 || expNeg(-720) > 1e-300 || math.Abs(expNeg(0)-1) > 2e-7 {
		t.Errorf("expNeg edge values: %v %v", expNeg(-1e6), expNeg(0))
	}
}

func TestLogPos(t *testing.T) {
	for _, x := range []float64{1e-300, 1e-30, 1e-10, 0.001, 0.1, 0.2, 1.0 / 3, 0.5, 0.7, 0.99999, 1, 1.5, 7, 1e10} {
		if got, want := logPos(x), math.Log(x); math.Abs(got-want) > 1e-11 {
			t.Errorf("logPos(%v) = %v, want %v", x, got, want)
		}
	}
	for x := 1e-30; x <= 1; x *= 1.0123 {
		if got, want := logPos(x), math.Log(x); math.Abs(got-want) > 1e-11 {
			t.Fatalf("logPos(%v) = %v, want %v", x, got, want)
		}
	}
}

// The row kernels (assembly for float32 on amd64) against the plain loop.
func TestRowKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const nItems, nCodes, n = 50, 40, 400
	items := make([]int32, n)
	codes := make([]uint16, n)
	for j := range items {
		items[j] = int32(rng.IntN(nItems))
		codes[j] = uint16(rng.IntN(nCodes))
	}
	slices.Sort(items)
	acc := make([]float32, 5*nItems)
	tab := make([]float32, 5*nCodes)
	for j := range acc {
		acc[j] = float32(rng.NormFloat64())
	}
	for j := range tab {
		tab[j] = float32(rng.NormFloat64())
	}
	wantAcc, wantTab := slices.Clone(acc), slices.Clone(tab)
	for j := range items {
		for c := 0; c < 5; c++ {
			wantAcc[5*int(items[j])+c] += tab[5*int(codes[j])+c]
		}
	}
	gatherAdd5(acc, tab, items, codes, nCodes)
	if !slices.Equal(acc, wantAcc) {
		t.Errorf("gatherAdd5 differs from the plain loop")
	}
	for j := range items {
		for c := 0; c < 5; c++ {
			wantTab[5*int(codes[j])+c] += acc[5*int(items[j])+c]
		}
	}
	scatterAdd5(tab, acc, items, codes, nCodes)
	if !slices.Equal(tab, wantTab) {
		t.Errorf("scatterAdd5 differs from the plain loop")
	}
	defer func() {
		if recover() == nil {
			t.Errorf("gatherAdd5 with an item outside the accumulator: no panic")
		}
	}()
	gatherAdd5(acc[:5*nItems-5], tab, items, codes, nCodes)
}
