// Package handoff holds the domain types shared by every part of the tool:
// items to label, the codebook, annotators, their labels, gold answers and
// consensus. It imports nothing of ours; every other package may import it.
//
// The flow of data is one way: in (cmd/loop, api) → store → crowd → features →
// learner → selector / verdict → store → out (export, autolabel, web).
package handoff

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
	"unicode"
)

// Kind says what an item holds.
type Kind string

// The kinds of item.
const (
	KindText  Kind = "text"  // Item.Text holds the text.
	KindImage Kind = "image" // Item.Path and Item.SHA256 reference an image file.
)

// Item is one thing to label: a text unit (often a sentence of a longer
// document) or an image.
//
// Rules: ID is non-empty and unique within a project. A text item has
// non-empty, valid UTF-8 Text and no Path. An image item has Path (absolute,
// the image stays where it is) and SHA256 (hex digest of the file's bytes at
// import). Parent names the document or source the item was split from ("" if
// none); Position is the item's 0-based position within its parent. Every
// covariate value that parses as a number must be finite.
type Item struct {
	ID         string            `json:"id"`
	Kind       Kind              `json:"kind"`
	Text       string            `json:"text,omitempty"`
	Path       string            `json:"path,omitempty"`
	SHA256     string            `json:"sha256,omitempty"`
	Parent     string            `json:"parent,omitempty"`
	Position   int               `json:"position,omitempty"`
	Covariates map[string]string `json:"covariates,omitempty"`
}

// Validate checks the item's rules and says which one is broken.
func (it *Item) Validate() error {
	if strings.TrimSpace(it.ID) == "" {
		return errors.New("id: empty item id")
	}
	switch it.Kind {
	case KindText:
		if strings.TrimSpace(it.Text) == "" {
			return errors.New("text: empty text")
		}
	case KindImage:
		if it.Path == "" {
			return errors.New("path: image item without a path")
		}
	default:
		return fmt.Errorf("kind: unknown item kind %q (want text or image)", it.Kind)
	}
	for k, v := range it.Covariates {
		if err := CheckCovariate(v); err != nil {
			return fmt.Errorf("%s: %w", k, err)
		}
	}
	return nil
}

// CheckCovariate reports an error if v parses as a number that is NaN or
// infinite. Categorical values (anything that does not parse) are accepted.
func CheckCovariate(v string) error {
	f, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
	if err != nil {
		return nil
	}
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return fmt.Errorf("covariate value %q is not a finite number", v)
	}
	return nil
}

// Scale says whether a codebook's classes have an order.
type Scale string

// The scales of a codebook.
const (
	Nominal Scale = "nominal" // classes have no order
	Ordinal Scale = "ordinal" // classes are listed from lowest to highest
)

// Class is one answer of a codebook.
//
// Rules: Key is non-empty, unique within its codebook, and is what labels
// carry. Name is for people; Description says when to choose the class.
type Class struct {
	Key         string `json:"key" yaml:"key"`
	Name        string `json:"name,omitempty" yaml:"name,omitempty"`
	Description string `json:"description,omitempty" yaml:"description,omitempty"`
}

// MaxClasses is the most classes a codebook may have: the consensus and
// agreement code keeps a label's class in one byte (crowd.Labels), and the
// store keeps it in two.
const MaxClasses = 255

// Codebook is the question people answer, with its classes.
//
// Rules: at least two and at most MaxClasses classes, with unique keys
// made of printable characters (no control characters). For an Ordinal codebook the
// classes are listed in order, lowest first, and Class index i is position i.
// An empty Scale means Nominal.
type Codebook struct {
	Name         string  `json:"name,omitempty" yaml:"name,omitempty"`
	Question     string  `json:"question" yaml:"question"`
	Scale        Scale   `json:"scale,omitempty" yaml:"scale,omitempty"`
	Classes      []Class `json:"classes" yaml:"classes"`
	Instructions string  `json:"instructions,omitempty" yaml:"instructions,omitempty"`
}

// Validate checks the codebook's rules and says which one is broken.
func (c *Codebook) Validate() error {
	if strings.TrimSpace(c.Question) == "" {
		return errors.New("question: the codebook needs a question")
	}
	switch c.Scale {
	case "", Nominal, Ordinal:
	default:
		return fmt.Errorf("scale: %q is not nominal or ordinal", c.Scale)
	}
	if len(c.Classes) < 2 {
		return fmt.Errorf("classes: need at least two classes, have %d", len(c.Classes))
	}
	if len(c.Classes) > MaxClasses {
		return fmt.Errorf("classes: %d classes; at most %d are supported (the consensus keeps a class in one byte): merge rare classes or split the question in two", len(c.Classes), MaxClasses)
	}
	seen := make(map[string]int, len(c.Classes))
	for i, cl := range c.Classes {
		if strings.TrimSpace(cl.Key) == "" {
			return fmt.Errorf("classes[%d].key: empty class key", i)
		}
		if strings.IndexFunc(cl.Key, unicode.IsControl) >= 0 {
			return fmt.Errorf("classes[%d].key: %q holds a control character", i, cl.Key)
		}
		if j, ok := seen[cl.Key]; ok {
			return fmt.Errorf("classes[%d].key: %q repeats classes[%d]", i, cl.Key, j)
		}
		seen[cl.Key] = i
	}
	return nil
}

// Index returns the position of the class with the given key.
func (c Codebook) Index(key string) (int, bool) {
	for i, cl := range c.Classes {
		if cl.Key == key {
			return i, true
		}
	}
	return -1, false
}

// Keys returns the class keys in codebook order.
func (c Codebook) Keys() []string {
	k := make([]string, len(c.Classes))
	for i, cl := range c.Classes {
		k[i] = cl.Key
	}
	return k
}

// IsOrdinal reports whether the classes are ordered.
func (c Codebook) IsOrdinal() bool { return c.Scale == Ordinal }

// Annotator is one person in the crowd. ID is what labels carry.
type Annotator struct {
	ID    string `json:"id"`
	Name  string `json:"name,omitempty"`
	Admin bool   `json:"admin,omitempty"`
}

// Label is one annotator's answer for one item.
//
// Rules: Item names a known item, Annotator is non-empty, Class is a key of
// the project's codebook. Time is when the answer was given (zero if
// unknown); Seconds is the time spent on it (0 if unknown, never negative).
// Wave is the crowd wave the label belongs to (1 … MaxWave): a later run
// of the crowd over the same items, to measure test–retest reliability.
// 0 means unset: the project's open wave when the label is added (1 until
// a new wave is opened), and wave 1 when read back.
type Label struct {
	Item      string    `json:"item"`
	Annotator string    `json:"annotator"`
	Class     string    `json:"label"`
	Time      time.Time `json:"time,omitzero"`
	Seconds   float64   `json:"seconds,omitempty"`
	Wave      int       `json:"wave,omitempty"`
}

// MaxWave is the highest wave a label may carry.
const MaxWave = 65535

// Gold is an item whose answer is known from experts. Source says who or what
// gave it (a file name, an expert's name).
type Gold struct {
	Item   string `json:"item"`
	Class  string `json:"label"`
	Source string `json:"source,omitempty"`
}

// Consensus is the combined crowd answer for one item.
//
// Rules: Posterior has one probability per codebook class, in codebook order,
// summing to 1; Class is the key of its largest entry. Labels is the number
// of labels left after cleaning. Method names the combining method
// ("majority", "dawid-skene", "one-coin"), or "gold" when an expert answer
// fixed it.
type Consensus struct {
	Item      string    `json:"item"`
	Class     string    `json:"class"`
	Posterior []float64 `json:"posterior"`
	Method    string    `json:"method"`
	Labels    int       `json:"labels"`
}

// Source says who or what gave an item's final label.
type Source string

// The sources of a final label.
const (
	SourceGold    Source = "gold"
	SourceCrowd   Source = "crowd"
	SourceMachine Source = "machine"
)

// MachineLabel is the classifier's answer for one item.
//
// Rules: Proba has one calibrated probability per codebook class; Class is
// the key of its largest entry and Confidence that entry. Model names the
// model version that gave it; Round the round it was given in.
type MachineLabel struct {
	Item       string    `json:"item"`
	Class      string    `json:"class"`
	Confidence float64   `json:"confidence"`
	Proba      []float64 `json:"proba,omitempty"`
	Model      string    `json:"model"`
	Round      int       `json:"round"`
}
