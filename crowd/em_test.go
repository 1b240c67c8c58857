package crowd

import (
	"math"
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
