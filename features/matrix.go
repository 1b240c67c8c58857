// Package features turns items into numeric rows: texts into sparse vectors
// (tokens, n-grams, TF-IDF or hashing) and images into dense vectors of named,
// hand-crafted features. It knows nothing of the store, HTTP or flags.
//
// Size: about 1,900 lines for the text tokeniser and vectoriser and the
// image features (colour, moments, texture, shape, gradients), which share
// the matrix types and the standardisation.
package features

// Matrix is a read-only matrix of feature rows, sparse or dense. Learners
// accept any Matrix, so one learner serves text and image features alike.
//
// Row returns the non-zero entries of row i: for a sparse matrix idx holds
// the column indices in increasing order and val the values; for a dense
// matrix idx is nil and val holds all Cols() values. Callers must not modify
// the returned slices.
type Matrix interface {
	Rows() int
	Cols() int
	Row(i int) (idx []int32, val []float64)
}

// CSR is a sparse matrix in compressed sparse row form: the entries of row i
// are Indices[Indptr[i]:Indptr[i+1]] (increasing) with values
// Data[Indptr[i]:Indptr[i+1]]. len(Indptr) == NRows+1.
type CSR struct {
	NRows, NCols int
	Indptr       []int
	Indices      []int32
	Data         []float64
}

// Rows returns the number of rows.
func (m *CSR) Rows() int { return m.NRows }

// Cols returns the number of columns.
func (m *CSR) Cols() int { return m.NCols }

// Row returns the column indices and values of row i's stored entries.
func (m *CSR) Row(i int) ([]int32, []float64) {
	a, b := m.Indptr[i], m.Indptr[i+1]
	return m.Indices[a:b], m.Data[a:b]
}

// Dense is a row-major dense matrix: entry (i, j) is Data[i*NCols+j].
type Dense struct {
	NRows, NCols int
	Data         []float64
}

// Rows returns the number of rows.
func (m *Dense) Rows() int { return m.NRows }

// Cols returns the number of columns.
func (m *Dense) Cols() int { return m.NCols }

// Row returns nil and the NCols values of row i.
func (m *Dense) Row(i int) ([]int32, []float64) {
	return nil, m.Data[i*m.NCols : (i+1)*m.NCols]
}
