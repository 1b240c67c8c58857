package features

import (
	"fmt"
	"math"
)

// Scaler standardises dense columns: x' = (x − Mean[j]) / Scale[j]. Scale[j]
// is the population standard deviation of column j over the fitting rows, or
// 1 when that spread is 0 (the column is then listed in Constant, and after
// scaling it is 0 on the fitting rows rather than NaN). It serialises to JSON
// so a model file can carry it; Names, if set, travel with it.
type Scaler struct {
	Names    []string  `json:"names,omitempty"`
	Mean     []float64 `json:"mean"`
	Scale    []float64 `json:"scale"`
	Constant []int     `json:"constant,omitempty"`
}

// FitScaler learns column means and spreads from x. names, if not nil, must
// have one name per column (a length mismatch panics) and label errors and
// Constant. It returns an error for a matrix without rows and for a value
// that is NaN or infinite, naming the row and column.
func FitScaler(x *Dense, names []string) (*Scaler, error) {
	if names != nil && len(names) != x.NCols {
		panic(fmt.Sprintf("features: %d names for %d columns", len(names), x.NCols))
	}
	if x.NRows == 0 {
		return nil, fmt.Errorf("features: cannot fit a scaler on no rows")
	}
	if err := checkFinite(x, names); err != nil {
		return nil, err
	}
	s := &Scaler{Names: names, Mean: make([]float64, x.NCols), Scale: make([]float64, x.NCols)}
	n := float64(x.NRows)
	for i := 0; i < x.NRows; i++ {
		for j, v := range x.Data[i*x.NCols : (i+1)*x.NCols] {
			s.Mean[j] += v
		}
	}
	for j := range s.Mean {
		s.Mean[j] /= n
	}
	for i := 0; i < x.NRows; i++ {
		for j, v := range x.Data[i*x.NCols : (i+1)*x.NCols] {
			d := v - s.Mean[j]
			s.Scale[j] += d * d
		}
	}
	for j := range s.Scale {
		sd := math.Sqrt(s.Scale[j] / n)
		// A spread at rounding level of the mean counts as none.
		if sd <= 1e-12*math.Max(1, math.Abs(s.Mean[j])) {
			sd = 1
			s.Constant = append(s.Constant, j)
		}
		s.Scale[j] = sd
	}
	return s, nil
}

// Transform returns a standardised copy of x. A column count other than the
// fitted one panics; a NaN or infinite value returns an error naming its row
// and column.
func (s *Scaler) Transform(x *Dense) (*Dense, error) {
	if x.NCols != len(s.Mean) {
		panic(fmt.Sprintf("features: scaler fitted on %d columns, given %d", len(s.Mean), x.NCols))
	}
	if err := checkFinite(x, s.Names); err != nil {
		return nil, err
	}
	out := &Dense{NRows: x.NRows, NCols: x.NCols, Data: make([]float64, len(x.Data))}
	for i := 0; i < x.NRows; i++ {
		row := x.Data[i*x.NCols : (i+1)*x.NCols]
		o := out.Data[i*x.NCols : (i+1)*x.NCols]
		for j, v := range row {
			o[j] = (v - s.Mean[j]) / s.Scale[j]
		}
	}
	return out, nil
}

// ConstantNames returns the names (or "column j" without names) of the
// columns that had no spread when fitting.
func (s *Scaler) ConstantNames() []string {
	out := make([]string, len(s.Constant))
	for k, j := range s.Constant {
		out[k] = colName(s.Names, j)
	}
	return out
}

func colName(names []string, j int) string {
	if names != nil {
		return fmt.Sprintf("column %d (%s)", j, names[j])
	}
	return fmt.Sprintf("column %d", j)
}

func checkFinite(x *Dense, names []string) error {
	if len(x.Data) != x.NRows*x.NCols {
		panic(fmt.Sprintf("features: dense matrix of %d values for %d×%d", len(x.Data), x.NRows, x.NCols))
	}
	for k, v := range x.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("features: row %d, %s is %v; want a finite number", k/x.NCols, colName(names, k%x.NCols), v)
		}
	}
	return nil
}
