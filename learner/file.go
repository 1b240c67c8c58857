package learner

import (
	"bufio"
	"compress/gzip"
	"encoding/gob"
	"encoding/json"
	"errors"
	"fmt"
	"io"

	"handoff"
	"handoff/features"
)

// FileFormat is the version of the model file this code writes (a
// Machine on disk, the file `loop model export` writes and the Beam
// pipeline reads). It reads this format and format 1, the one written
// before it.
const FileFormat = 2

// fileMagic opens every model file's header.
const fileMagic = "handoff-model"

// fileHeader is the first gob value of a model file, read before the body
// so that a file of a newer format is refused before anything else is
// decoded.
type fileHeader struct {
	Magic  string
	Format int
}

// machineFile is the body of a format-2 model file: a Machine, each field
// once. Exactly one of Bayes, Logistic and Forest is set, as Learner says.
type machineFile struct {
	Kind        handoff.Kind
	Learner     string
	Classes     []string
	Present     []int
	Temperature float64
	Text        *features.TextVectorizer
	Image       *features.ImageConfig
	Scaler      *features.Scaler
	Fingerprint string
	Metrics     []byte // JSON, as Machine.Metrics
	Version     string
	Threshold   float64
	Bayes       *BayesModel
	Logistic    *LogisticModel
	Forest      *ForestModel
}

// WriteMachine writes m as a model file: a gzip stream of two gob values,
// the header {Magic "handoff-model", Format FileFormat} and the machine
// (machineFile).
func WriteMachine(w io.Writer, m *Machine) error {
	if m.Model == nil {
		return errors.New("learner: the machine has no model")
	}
	f := machineFile{
		Kind: m.Kind, Learner: m.Learner, Classes: m.Classes, Present: m.Present, Temperature: m.Temperature,
		Text: m.Text, Image: m.Image, Scaler: m.Scaler, Fingerprint: m.Fingerprint, Metrics: m.Metrics,
		Version: m.Name, Threshold: m.Cutoff,
	}
	if f.Temperature == 0 {
		f.Temperature = 1 // none
	}
	base := m.Model
	if c, ok := base.(*Calibrated); ok {
		return fmt.Errorf("learner: the machine's model is wrapped in temperature scaling (T = %v); set Machine.Temperature instead", c.Temperature)
	}
	switch b := base.(type) {
	case *BayesModel:
		f.Bayes = b
	case *LogisticModel:
		f.Logistic = b
	case *ForestModel:
		f.Forest = b
	default:
		return fmt.Errorf("learner: cannot store a model of type %T", base)
	}
	zw := gzip.NewWriter(w)
	enc := gob.NewEncoder(zw)
	if err := enc.Encode(fileHeader{Magic: fileMagic, Format: FileFormat}); err != nil {
		return fmt.Errorf("learner: writing the model file header: %w", err)
	}
	if err := enc.Encode(&f); err != nil {
		return fmt.Errorf("learner: writing the model file: %w", err)
	}
	return zw.Close()
}

// ReadMachine reads a model file written by WriteMachine, or by an earlier
// release in format 1. A file of a newer format, or not a model file at
// all, is refused with an error that says so.
func ReadMachine(r io.Reader) (*Machine, error) {
	zr, err := gzip.NewReader(bufio.NewReader(r))
	if err != nil {
		return nil, fmt.Errorf("learner: not a model file (not gzip): %w", err)
	}
	dec := gob.NewDecoder(zr)
	var h fileHeader
	if err := dec.Decode(&h); err != nil || h.Magic != fileMagic {
		return nil, errors.New("learner: not a model file (no model header)")
	}
	var m *Machine
	switch {
	case h.Format > FileFormat:
		return nil, fmt.Errorf("learner: model file format %d is newer than this program reads (%d): upgrade loop", h.Format, FileFormat)
	case h.Format == 1:
		m, err = readFormat1(dec)
	case h.Format == FileFormat:
		var f machineFile
		if err = dec.Decode(&f); err == nil {
			m, err = f.machine()
		}
	default:
		return nil, fmt.Errorf("learner: model file format %d is not valid", h.Format)
	}
	if err != nil {
		return nil, fmt.Errorf("learner: reading the model file: %w", err)
	}
	return m, m.check()
}

// machine is the Machine a format-2 body describes.
func (f *machineFile) machine() (*Machine, error) {
	m := &Machine{
		Kind: f.Kind, Learner: f.Learner, Classes: f.Classes, Present: f.Present, Temperature: f.Temperature,
		Text: f.Text, Image: f.Image, Scaler: f.Scaler, Fingerprint: f.Fingerprint, Metrics: json.RawMessage(f.Metrics),
		Name: f.Version, Cutoff: f.Threshold,
	}
	switch {
	case f.Bayes != nil:
		m.Model = f.Bayes
	case f.Logistic != nil:
		m.Model = f.Logistic
	case f.Forest != nil:
		m.Model = f.Forest
	default:
		return nil, errors.New("the model file holds no model")
	}
	return m, nil
}

// check refuses a machine whose parts do not fit together.
func (m *Machine) check() error {
	if len(m.Classes) < 2 || len(m.Present) != m.Model.Classes() {
		return fmt.Errorf("learner: the model file is inconsistent: %d codebook classes, %d present, a model of %d classes", len(m.Classes), len(m.Present), m.Model.Classes())
	}
	for j, c := range m.Present {
		if c < 0 || c >= len(m.Classes) || j > 0 && c <= m.Present[j-1] {
			return fmt.Errorf("learner: the model file is inconsistent: present classes %v for %d codebook classes", m.Present, len(m.Classes))
		}
	}
	if !(m.Temperature > 0) {
		return fmt.Errorf("learner: the model file's temperature %v is not positive", m.Temperature)
	}
	switch m.Kind {
	case handoff.KindText:
		if m.Text == nil {
			return errors.New("learner: the model file has no text vectoriser")
		}
	case handoff.KindImage:
		if m.Image == nil || m.Scaler == nil {
			return errors.New("learner: the model file has image features but no image configuration or scaler")
		}
		if err := m.Image.CheckNames(m.Scaler.Names); err != nil {
			return err
		}
	default:
		return fmt.Errorf("learner: the model file labels items of kind %q; want text or image", m.Kind)
	}
	return nil
}

// fileV1 is the body of a format-1 model file: the fitted model of the
// present classes, their keys, the temperature (again in Metrics) and, as
// JSON in Features, the machine's own fields (machineV1). Gob matches
// fields by name, so this reads what format 1 wrote.
type fileV1 struct {
	Format      int
	Kind        string
	Features    json.RawMessage
	Classes     []string
	Fingerprint string
	Bayes       *BayesModel
	Logistic    *LogisticModel
	Forest      *ForestModel
	Temperature float64
}

// machineV1 is format 1's JSON of the machine's own fields.
type machineV1 struct {
	Format    int                      `json:"machine_format"`
	Kind      handoff.Kind             `json:"kind"`
	Classes   []string                 `json:"classes"`
	Present   []int                    `json:"present"`
	Text      *features.TextVectorizer `json:"text,omitempty"`
	Image     *features.ImageConfig    `json:"image,omitempty"`
	Scaler    *features.Scaler         `json:"scaler,omitempty"`
	Metrics   json.RawMessage          `json:"metrics,omitempty"`
	Version   string                   `json:"version"`
	Threshold float64                  `json:"threshold,omitempty"`
}

// readFormat1 reads the body of a format-1 model file.
func readFormat1(dec *gob.Decoder) (*Machine, error) {
	var f fileV1
	if err := dec.Decode(&f); err != nil {
		return nil, err
	}
	var mf machineV1
	if err := json.Unmarshal(f.Features, &mf); err != nil {
		return nil, fmt.Errorf("format 1 feature configuration: %w", err)
	}
	if mf.Format != 1 || len(mf.Present) != len(f.Classes) {
		return nil, errors.New("a format-1 file holding a bare model without its features; it was not written by `loop model export`")
	}
	for j, c := range mf.Present {
		if c < 0 || c >= len(mf.Classes) || mf.Classes[c] != f.Classes[j] {
			return nil, errors.New("a format-1 file whose class keys do not match its feature configuration")
		}
	}
	T := f.Temperature
	if T == 0 {
		T = 1
	}
	m2 := machineFile{
		Kind: mf.Kind, Learner: f.Kind, Classes: mf.Classes, Present: mf.Present, Temperature: T,
		Text: mf.Text, Image: mf.Image, Scaler: mf.Scaler, Fingerprint: f.Fingerprint, Metrics: mf.Metrics,
		Version: mf.Version, Threshold: mf.Threshold, Bayes: f.Bayes, Logistic: f.Logistic, Forest: f.Forest,
	}
	return m2.machine()
}
