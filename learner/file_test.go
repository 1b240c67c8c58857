package learner

import (
	"bytes"
	"compress/gzip"
	"encoding/gob"
	"encoding/json"
	"errors"
	"slices"
	"strings"
	"testing"
)

func TestModelFileRoundTrip(t *testing.T) {
	Xr, y := twoBlobs(40, 3)
	X, T := dense(Xr), oneHot(y, 2)
	fp := FingerprintData(X, T, nil)
	if fp2 := FingerprintData(X, T, []float64(slices.Repeat([]float64{1}, 80))); fp2 != fp {
		t.Error("nil weights and all-ones weights fingerprint differently")
	}
	T2 := oneHot(y, 2)
	T2[0] = []float64{0.5, 0.5}
	if FingerprintData(X, T2, nil) == fp {
		t.Error("other targets, same fingerprint")
	}
	classes := []string{"cat", "dog"}
	feat := json.RawMessage(`{"names":["a","b","c"]}`)
	for _, l := range []Learner{Bayes{}, Logistic{Lambda: 0.5}, Forest{Trees: 5, Seed: 1}} {
		Xl := X
		if _, ok := l.(Bayes); ok {
			Xl = dense(nonNeg(Xr))
		}
		m, err := l.Fit(Xl, T, nil)
		if err != nil {
			t.Fatal(err)
		}
		cm := &Calibrated{Base: m, Temperature: 1.7}
		f, err := NewFile(cm, classes, feat, fp, Metrics{Rows: 80, CVAccuracy: 0.9})
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if err := Save(&buf, f); err != nil {
			t.Fatal(err)
		}
		raw := buf.Bytes()
		g, err := Load(bytes.NewReader(raw), classes)
		if err != nil {
			t.Fatal(err)
		}
		if g.Kind != f.Kind || g.Fingerprint != fp || string(g.Features) != string(feat) || g.Metrics != f.Metrics || g.Metrics.Temperature != 1.7 {
			t.Errorf("%s: round trip lost fields: %+v", f.Kind, g)
		}
		pa, pb := cm.PredictProba(Xl), g.Model().PredictProba(Xl)
		for i := range pa {
			if !slices.Equal(pa[i], pb[i]) {
				t.Fatalf("%s: row %d predicts %v after loading, %v before", f.Kind, i, pb[i], pa[i])
			}
		}
		var mm *ClassMismatchError
		if _, err := Load(bytes.NewReader(raw), []string{"dog", "cat"}); !errors.As(err, &mm) {
			t.Errorf("%s: loading for another codebook: got %v, want a ClassMismatchError", f.Kind, err)
		}
	}
}

func nonNeg(rows [][]float64) [][]float64 {
	out := make([][]float64, len(rows))
	for i, r := range rows {
		for _, v := range r {
			out[i] = append(out[i], v*v)
		}
	}
	return out
}

func TestModelFileRefusesNewerFormatAndJunk(t *testing.T) {
	var buf bytes.Buffer
	zw := gzip.NewWriter(&buf)
	enc := gob.NewEncoder(zw)
	enc.Encode(fileHeader{Magic: fileMagic, Format: FormatVersion + 1})
	enc.Encode(&File{Format: FormatVersion + 1})
	zw.Close()
	_, err := Load(&buf, nil)
	if err == nil || !strings.Contains(err.Error(), "newer") {
		t.Errorf("newer format: got %v", err)
	}
	if _, err := Load(strings.NewReader("not a model"), nil); err == nil || !strings.Contains(err.Error(), "not a model file") {
		t.Errorf("junk: got %v", err)
	}
}
