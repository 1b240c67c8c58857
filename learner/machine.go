package learner

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"slices"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/features"
)

// Machine is a trained pipeline that labels items: the feature extraction
// (a fitted text vectoriser, or an image configuration with its scaler), a
// fitted model, its calibration temperature and the codebook's class keys.
//
// Rules: Kind says which items it labels. Classes are all the codebook's
// keys, in codebook order; Present lists the indices of the classes the model
// was trained on, in increasing order (classes with no training examples get
// probability 0). Temperature T > 0 rescales the model's probabilities as
// p'_c ∝ p_c^(1/T) (temperature scaling, Guo et al. 2017); T = 1 leaves them
// as they are.
type Machine struct {
	Kind        handoff.Kind `json:"kind"`
	Learner     string       `json:"learner"` // logistic, bayes or forest
	Classes     []string     `json:"classes"`
	Present     []int        `json:"present"`
	Temperature float64      `json:"temperature"`

	Text   *features.TextVectorizer `json:"text,omitempty"`
	Image  *features.ImageConfig    `json:"image,omitempty"`
	Scaler *features.Scaler         `json:"scaler,omitempty"`

	Model Model `json:"-"`

	// Fingerprint is the SHA-256 of the training set (item ids, texts or
	// image hashes, and targets) in hex; Metrics are the figures measured
	// when it was trained; Version names it (set by the caller, e.g.
	// "r3-1a2b3c4d"); Cutoff is the autolabel threshold recorded when the
	// machine was exported (0 if none).
	Fingerprint string          `json:"fingerprint"`
	Metrics     json.RawMessage `json:"metrics,omitempty"`
	Name        string          `json:"version"`
	Cutoff      float64         `json:"threshold,omitempty"`
}

// Version returns the machine's version name.
func (m *Machine) Version() string { return m.Name }

// Threshold returns the autolabel threshold recorded at export (0 if none).
func (m *Machine) Threshold() float64 { return m.Cutoff }

// Featurise turns items into the feature rows the model takes. Every item
// must be of the machine's kind; image items are read from their Path.
func (m *Machine) Featurise(items []handoff.Item) (features.Matrix, error) {
	for i := range items {
		if items[i].Kind != m.Kind {
			return nil, fmt.Errorf("item %q is of kind %s; this model labels %s items", items[i].ID, items[i].Kind, m.Kind)
		}
	}
	switch m.Kind {
	case handoff.KindText:
		if m.Text == nil {
			return nil, errors.New("model file has no text vectoriser")
		}
		texts := make([]string, len(items))
		for i := range items {
			texts[i] = items[i].Text
		}
		return m.Text.Transform(texts), nil
	case handoff.KindImage:
		if m.Image == nil || m.Scaler == nil {
			return nil, errors.New("model file has no image configuration or scaler")
		}
		paths := make([]string, len(items))
		for i := range items {
			paths[i] = items[i].Path
		}
		x, err := m.Image.TransformFiles(paths)
		if err != nil {
			return nil, err
		}
		return m.Scaler.Transform(x)
	}
	return nil, fmt.Errorf("unknown item kind %q", m.Kind)
}

// ProbaInto writes the calibrated probability of every codebook class for
// each row of X into dst (row-major, len(dst) == X.Rows()*len(Classes)).
func (m *Machine) ProbaInto(dst []float64, X features.Matrix) {
	K := len(m.Classes)
	n := X.Rows()
	if len(dst) != n*K {
		panic("learner: ProbaInto destination has the wrong length")
	}
	kp := m.Model.Classes()
	raw := make([]float64, n*kp)
	m.Model.PredictProbaInto(raw, X)
	clear(dst)
	for i := range n {
		row := raw[i*kp : (i+1)*kp]
		Temper(row, m.Temperature)
		for j, c := range m.Present {
			dst[i*K+c] = row[j]
		}
	}
}

// Temper replaces the probabilities p by softmax(log p / T) in place
// (temperature scaling, Guo et al. 2017), the same rescaling a Calibrated
// model applies; log p is clamped below at log 1e-300. T == 1 leaves p as
// it is.
func Temper(p []float64, T float64) { scale(p, T) }

// Proba featurises items and returns their calibrated class probabilities,
// row-major (len(items)×len(Classes)).
func (m *Machine) Proba(items []handoff.Item) ([]float64, error) {
	X, err := m.Featurise(items)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(items)*len(m.Classes))
	m.ProbaInto(out, X)
	return out, nil
}

// Label featurises and scores items and returns one machine label each: the
// most probable class (the first on ties), its calibrated probability as the
// confidence, and the full probability vector. Model is the machine's
// version; Round is left 0 for the caller to set.
func (m *Machine) Label(items []handoff.Item) ([]handoff.MachineLabel, error) {
	p, err := m.Proba(items)
	if err != nil {
		return nil, err
	}
	K := len(m.Classes)
	out := make([]handoff.MachineLabel, len(items))
	for i := range items {
		row := p[i*K : (i+1)*K]
		best := floats.MaxIdx(row)
		out[i] = handoff.MachineLabel{Item: items[i].ID, Class: m.Classes[best], Confidence: row[best], Proba: slices.Clone(row), Model: m.Name}
	}
	return out, nil
}

// MarshalMachine returns the bytes WriteMachine writes.
func MarshalMachine(m *Machine) ([]byte, error) {
	var b bytes.Buffer
	if err := WriteMachine(&b, m); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// LoadMachine reads a machine file from path.
func LoadMachine(path string) (*Machine, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	m, err := ReadMachine(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return m, nil
}

// CheckClasses returns an error unless the machine was made for a codebook
// with exactly these class keys, in this order.
func (m *Machine) CheckClasses(keys []string) error {
	if !slices.Equal(m.Classes, keys) {
		return fmt.Errorf("this model was trained for classes %v, but the project's codebook has %v: train a model for this codebook", m.Classes, keys)
	}
	return nil
}

// Fingerprint returns the hex SHA-256 of a training set given as one string
// per row (e.g. item id, content hash and target) — a stable name for what a
// model was trained on.
func Fingerprint(rows []string) string {
	h := sha256.New()
	for _, r := range rows {
		h.Write([]byte(r))
		h.Write([]byte{0})
	}
	return hex.EncodeToString(h.Sum(nil))
}
