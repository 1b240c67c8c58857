package learner

import (
	"bufio"
	"compress/gzip"
	"crypto/sha256"
	"encoding/binary"
	"encoding/gob"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"

	"handoff/features"
)

// FormatVersion is the model-file format this code writes and the newest
// it reads.
const FormatVersion = 1

// fileMagic opens every model file's header.
const fileMagic = "handoff-model"

// The learner kinds a File names.
const (
	KindBayes    = "bayes"
	KindLogistic = "logistic"
	KindForest   = "forest"
)

// Metrics are the figures stored with a model: k-fold cross-validation
// (CVResult) and the temperature fit (Calibration). Zero values mean not
// measured.
type Metrics struct {
	Rows       int     `json:"rows"`
	Folds      int     `json:"folds,omitempty"`
	CVAccuracy float64 `json:"cv_accuracy,omitempty"`
	CVMacroF1  float64 `json:"cv_macro_f1,omitempty"`
	CVECE      float64 `json:"cv_ece,omitempty"`
	ECEBefore  float64 `json:"ece_before,omitempty"`
	ECEAfter   float64 `json:"ece_after,omitempty"`
	// Temperature is the temperature scaling T (1 or 0: none).
	Temperature float64 `json:"temperature,omitempty"`
}

// File is a model file: a fitted model with what is needed to use and
// trust it later.
//
// On disk (Save, Load) it is a gzip stream of two gob values: a header
// {Magic "handoff-model", Format} and then the File. The header is read
// first, so a file from a newer format is refused before its body is
// decoded. Exactly one of Bayes, Logistic and Forest is set, as Kind says;
// each holds its learner configuration (Config) and parameters.
type File struct {
	Format int
	Kind   string
	// Features is the feature configuration as the caller gives it (for
	// text, the vectoriser's JSON with its vocabulary; for images, the
	// feature names and standardisation); it is stored unread.
	Features json.RawMessage
	// Classes are the codebook's class keys in the model's class order.
	Classes []string
	// Fingerprint is the hex SHA-256 of the training set (see FingerprintData).
	Fingerprint string
	Metrics     Metrics

	Bayes    *BayesModel
	Logistic *LogisticModel
	Forest   *ForestModel
	// Temperature ≠ 0 and ≠ 1 wraps the model in temperature scaling.
	Temperature float64
}

type fileHeader struct {
	Magic  string
	Format int
}

// NewFile packs a fitted model (a *BayesModel, *LogisticModel or
// *ForestModel, optionally inside a *Calibrated) with its class keys,
// feature configuration, training-set fingerprint and metrics. It panics
// if the number of class keys differs from m.Classes() and returns an error
// for a model type it cannot store.
func NewFile(m Model, classes []string, feat json.RawMessage, fingerprint string, metrics Metrics) (*File, error) {
	if len(classes) != m.Classes() {
		panic(fmt.Sprintf("learner: %d class keys for a model of %d classes", len(classes), m.Classes()))
	}
	f := &File{Format: FormatVersion, Features: feat, Classes: slices.Clone(classes), Fingerprint: fingerprint, Metrics: metrics}
	if c, ok := m.(*Calibrated); ok {
		f.Temperature = c.Temperature
		f.Metrics.Temperature = c.Temperature
		m = c.Base
	}
	switch b := m.(type) {
	case *BayesModel:
		f.Kind, f.Bayes = KindBayes, b
	case *LogisticModel:
		f.Kind, f.Logistic = KindLogistic, b
	case *ForestModel:
		f.Kind, f.Forest = KindForest, b
	default:
		return nil, fmt.Errorf("learner: cannot store a model of type %T", m)
	}
	return f, nil
}

// Model returns the stored model, wrapped in temperature scaling if the
// file has a temperature.
func (f *File) Model() Model {
	var m Model
	switch {
	case f.Bayes != nil:
		m = f.Bayes
	case f.Logistic != nil:
		m = f.Logistic
	case f.Forest != nil:
		m = f.Forest
	default:
		return nil
	}
	if f.Temperature != 0 && f.Temperature != 1 {
		m = &Calibrated{Base: m, Temperature: f.Temperature}
	}
	return m
}

// Save writes f to w (gzip-compressed gob; see File).
func Save(w io.Writer, f *File) error {
	if f.Model() == nil {
		return errors.New("learner: the model file holds no model")
	}
	zw := gzip.NewWriter(w)
	enc := gob.NewEncoder(zw)
	if err := enc.Encode(fileHeader{Magic: fileMagic, Format: f.Format}); err != nil {
		return fmt.Errorf("learner: writing model file header: %w", err)
	}
	if err := enc.Encode(f); err != nil {
		return fmt.Errorf("learner: writing model file: %w", err)
	}
	return zw.Close()
}

// ClassMismatchError is returned by Load when a model was trained for a
// codebook with other class keys.
type ClassMismatchError struct {
	Model, Codebook []string
}

// Error says which class keys the model and the codebook have.
func (e *ClassMismatchError) Error() string {
	return fmt.Sprintf("learner: the model was trained for classes %q but the codebook has %q: retrain the model for this codebook", e.Model, e.Codebook)
}

// Load reads a model file written by Save. If classes is non-nil, the
// file's class keys must equal it (same keys, same order), or Load returns a
// *ClassMismatchError. A file of a newer format than FormatVersion, or not a
// model file at all, is refused with an error saying so.
func Load(r io.Reader, classes []string) (*File, error) {
	zr, err := gzip.NewReader(bufio.NewReader(r))
	if err != nil {
		return nil, fmt.Errorf("learner: not a model file (not gzip): %w", err)
	}
	dec := gob.NewDecoder(zr)
	var h fileHeader
	if err := dec.Decode(&h); err != nil || h.Magic != fileMagic {
		return nil, errors.New("learner: not a model file (no model header)")
	}
	if h.Format > FormatVersion {
		return nil, fmt.Errorf("learner: model file format %d is newer than this program reads (%d): upgrade the program", h.Format, FormatVersion)
	}
	if h.Format < 1 {
		return nil, fmt.Errorf("learner: model file format %d is not valid", h.Format)
	}
	var f File
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("learner: reading model file: %w", err)
	}
	if f.Model() == nil {
		return nil, errors.New("learner: the model file holds no model")
	}
	if classes != nil && !slices.Equal(classes, f.Classes) {
		return nil, &ClassMismatchError{Model: f.Classes, Codebook: slices.Clone(classes)}
	}
	return &f, nil
}

// FingerprintData returns the hex SHA-256 of a training set: the little-endian
// bytes of Rows, Cols and the number of classes (uint64 each), then per row
// its entry count (uint64), column indices (int32; 0..Cols−1 for a dense
// row), values (float64 bits), target probabilities (float64 bits) and
// weight (float64 bits; 1 when weights == nil). Equal training sets give
// equal fingerprints; a sparse and a dense copy of one matrix differ only if
// their stored entries differ.
func FingerprintData(X features.Matrix, targets [][]float64, weights []float64) string {
	k := checkShape(X, targets, weights)
	h := sha256.New()
	w := bufio.NewWriter(h)
	var b [8]byte
	u64 := func(v uint64) {
		binary.LittleEndian.PutUint64(b[:], v)
		w.Write(b[:])
	}
	u64(uint64(X.Rows()))
	u64(uint64(X.Cols()))
	u64(uint64(k))
	for i := 0; i < X.Rows(); i++ {
		idx, val := X.Row(i)
		u64(uint64(len(val)))
		for p := range val {
			j := uint32(p)
			if idx != nil {
				j = uint32(idx[p])
			}
			binary.LittleEndian.PutUint32(b[:4], j)
			w.Write(b[:4])
		}
		for _, v := range val {
			u64(math.Float64bits(v))
		}
		for _, v := range targets[i] {
			u64(math.Float64bits(v))
		}
		wt := 1.0
		if weights != nil {
			wt = weights[i]
		}
		u64(math.Float64bits(wt))
	}
	w.Flush()
	return hex.EncodeToString(h.Sum(nil))
}
