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

// The row kernels (assembly for float32 on amd64, Go for float64) against
// the plain loop.
func TestRowKernels(t *testing.T) {
	testRowKernels[float32](t)
	testRowKernels[float64](t)
}

func testRowKernels[F float](t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const nItems, nCodes, n = 50, 40, 401 // odd: the assembly's last single label too
	items := make([]int, n)
	for j := range items {
		items[j] = rng.IntN(nItems)
	}
	slices.Sort(items)
	items[n-1] = nItems - 1
	lab := make([]uint32, n)
	codes := make([]int, n)
	for j := range lab {
		codes[j] = rng.IntN(nCodes)
		lab[j] = uint32(codes[j])<<16 | uint32(items[j])
	}
	acc := make([]F, 5*nItems)
	tab := make([]F, 5*nCodes)
	for j := range acc {
		acc[j] = F(rng.NormFloat64())
	}
	for j := range tab {
		tab[j] = F(rng.NormFloat64())
	}
	wantAcc, wantTab := slices.Clone(acc), slices.Clone(tab)
	for j := range items {
		for c := 0; c < 5; c++ {
			wantAcc[5*items[j]+c] += tab[5*codes[j]+c]
		}
	}
	gatherAdd5(acc, tab, lab, nCodes)
	if !slices.Equal(acc, wantAcc) {
		t.Errorf("gatherAdd5 differs from the plain loop")
	}
	for j := range items {
		for c := 0; c < 5; c++ {
			wantTab[5*codes[j]+c] += acc[5*items[j]+c]
		}
	}
	scatterAdd5(tab, acc, lab, nCodes)
	if !slices.Equal(tab, wantTab) {
		t.Errorf("scatterAdd5 differs from the plain loop")
	}
	defer func() {
		if recover() == nil {
			t.Errorf("gatherAdd5 with an item outside the accumulator: no panic")
		}
	}()
	gatherAdd5(acc[:5*nItems-5], tab, lab, nCodes)
}
