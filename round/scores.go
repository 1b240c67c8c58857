package round

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// scoresState is where a round keeps its scores of the archive, so that
// next, autolabel and verdict reuse them instead of featurising the archive
// again.
const scoresState = "scores"

// scores are one round's probability vectors per item position: the model's
// calibrated probabilities, except on its training items, where they are
// the out-of-fold ones (what the selector should judge conflicts by). Rows
// of items the round did not score (another kind, or added since) are nil.
type scores struct {
	Round int
	Model string
	K     int
	rows  [][]float64
}

// row returns item i's probabilities, nil if it was not scored.
func (s *scores) row(i int) []float64 {
	if s == nil || i >= len(s.rows) {
		return nil
	}
	return s.rows[i]
}

// encode lays the scores out as: "HS1", round (uint32), model name length
// (uint16) and name, K (uint16), n (uint32), then per item a byte (1 scored,
// 0 not) followed, when scored, by K float64 values, little-endian (exact:
// the threshold a verdict chose compares with the same numbers later).
func (s *scores) encode() []byte {
	b := []byte("HS1")
	b = binary.LittleEndian.AppendUint32(b, uint32(s.Round))
	b = binary.LittleEndian.AppendUint16(b, uint16(len(s.Model)))
	b = append(b, s.Model...)
	b = binary.LittleEndian.AppendUint16(b, uint16(s.K))
	b = binary.LittleEndian.AppendUint32(b, uint32(len(s.rows)))
	for _, r := range s.rows {
		if r == nil {
			b = append(b, 0)
			continue
		}
		b = append(b, 1)
		for _, v := range r {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
	}
	return b
}

var errBadScores = errors.New("the stored scores are damaged: run `loop round DIR --force` to score the archive again")

func decodeScores(b []byte) (*scores, error) {
	if b == nil {
		return nil, nil
	}
	if len(b) < 3 || string(b[:3]) != "HS1" {
		return nil, errBadScores
	}
	b = b[3:]
	if len(b) < 6 {
		return nil, errBadScores
	}
	s := &scores{Round: int(binary.LittleEndian.Uint32(b))}
	nl := int(binary.LittleEndian.Uint16(b[4:]))
	b = b[6:]
	if len(b) < nl+6 {
		return nil, errBadScores
	}
	s.Model = string(b[:nl])
	b = b[nl:]
	s.K = int(binary.LittleEndian.Uint16(b))
	n := int(binary.LittleEndian.Uint32(b[2:]))
	b = b[6:]
	s.rows = make([][]float64, n)
	for i := range n {
		if len(b) < 1 {
			return nil, errBadScores
		}
		flag := b[0]
		b = b[1:]
		if flag == 0 {
			continue
		}
		if len(b) < 8*s.K {
			return nil, errBadScores
		}
		r := make([]float64, s.K)
		sum := 0.0
		for c := range r {
			r[c] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*c:]))
			sum += r[c]
		}
		if !(math.Abs(sum-1) < 1e-6) {
			return nil, fmt.Errorf("%w (item %d: probabilities sum to %v)", errBadScores, i, sum)
		}
		s.rows[i] = r
		b = b[8*s.K:]
	}
	if len(b) != 0 {
		return nil, errBadScores
	}
	return s, nil
}
