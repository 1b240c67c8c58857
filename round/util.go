package round

import (
	"bytes"
	"io"

	"handoff/features"
)

func bytesReader(b []byte) io.Reader { return bytes.NewReader(b) }

// spread lays the rows of x (one per entry of idx) out at item positions, so
// that row idx[j] of the result is row j of x and other rows are empty.
func spread(x features.Matrix, idx []int, n int) features.Matrix {
	m := &features.CSR{NRows: n, NCols: x.Cols(), Indptr: make([]int, n+1)}
	at := make([]int, n)
	for i := range at {
		at[i] = -1
	}
	for j, i := range idx {
		at[i] = j
	}
	for i := range n {
		if j := at[i]; j >= 0 {
			ix, v := x.Row(j)
			if ix == nil {
				for c, val := range v {
					if val != 0 {
						m.Indices = append(m.Indices, int32(c))
						m.Data = append(m.Data, val)
					}
				}
			} else {
				m.Indices = append(m.Indices, ix...)
				m.Data = append(m.Data, v...)
			}
		}
		m.Indptr[i+1] = len(m.Indices)
	}
	return m
}
