package sim

import (
	"fmt"
	"strconv"
	"strings"
)

// ParseShared reads a shared confusion written FROM:TO:RATE (classes c1,
// c2, …; e.g. "c1:c2:0.3").
func ParseShared(s string) (Shared, error) {
	f := strings.Split(s, ":")
	if len(f) != 3 {
		return Shared{}, fmt.Errorf("%q: want FROM:TO:RATE, e.g. c1:c2:0.3", s)
	}
	rate, err := strconv.ParseFloat(f[2], 64)
	if err != nil {
		return Shared{}, fmt.Errorf("%q: rate %q is not a number", s, f[2])
	}
	return Shared{From: f[0], To: f[1], Rate: rate}, nil
}

// ParseLabelRange reads how many labels each annotator of a sparse crowd
// gives: MIN-MAX (e.g. "10-70") or one whole number ≥ 1.
func ParseLabelRange(s string) (lo, hi int, err error) {
	a, b, ok := strings.Cut(s, "-")
	if !ok {
		b = a
	}
	lo, err1 := strconv.Atoi(strings.TrimSpace(a))
	hi, err2 := strconv.Atoi(strings.TrimSpace(b))
	if err1 != nil || err2 != nil || lo < 1 || hi < lo {
		return 0, 0, fmt.Errorf("%q: want MIN-MAX (e.g. 10-70) or one whole number ≥ 1", s)
	}
	return lo, hi, nil
}
