package learner

import (
	"bufio"
	"compress/gzip"
	"encoding/csv"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"handoff/features"
)

// readCSV reads a CSV file from testdata, skipping lines that start with '#'
// and the header row.
func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var r io.Reader = f
	if strings.HasSuffix(path, ".gz") {
		gz, err := gzip.NewReader(f)
		if err != nil {
			t.Fatal(err)
		}
		r = gz
	}
	var body strings.Builder
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		if strings.HasPrefix(sc.Text(), "#") {
			continue
		}
		body.WriteString(sc.Text())
		body.WriteByte('\n')
	}
	recs, err := csv.NewReader(strings.NewReader(body.String())).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs[1:]
}

func atof(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// oneHot turns class indices into target rows.
func oneHot(y []int, k int) [][]float64 {
	out := make([][]float64, len(y))
	for i, c := range y {
		out[i] = make([]float64, k)
		out[i][c] = 1
	}
	return out
}

func dense(rows [][]float64) *features.Dense {
	m := &features.Dense{NRows: len(rows), NCols: len(rows[0])}
	for _, r := range rows {
		m.Data = append(m.Data, r...)
	}
	return m
}

func relErr(got, want float64) float64 {
	return math.Abs(got-want) / math.Max(math.Abs(want), 1e-300)
}

func finiteModel(t *testing.T, p [][]float64) {
	t.Helper()
	for i, r := range p {
		var s float64
		for _, v := range r {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				t.Fatalf("row %d: bad probability %v", i, r)
			}
			s += v
		}
		if math.Abs(s-1) > 1e-9 {
			t.Fatalf("row %d: probabilities sum to %v", i, s)
		}
	}
}
