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

// Codebook is what people are asked: its first question, with its classes,
// and optionally follow-up questions, each asked when its condition on an
// earlier answer holds (a question tree).
//
// Rules: the first question (Key, Question, Scale, Classes, Instructions)
// and every follow-up have at least two and at most MaxClasses classes, with
// unique keys made of printable characters (no control characters). For an
// Ordinal question the classes are listed in order, lowest first, and Class
// index i is position i. An empty Scale means Nominal. Question keys are
// unique; an empty Key means the first question is keyed FirstQuestion. A
// follow-up's condition names another question and some of its classes; a
// follow-up without a condition is asked of every item. Conditions must not
// form a cycle, and every question must be reachable from the first.
//
// A one-question codebook is a Codebook with no Questions: every part of
// the tool treats it as before. The fields of the first question stay at the
// top level so that such codebooks (and the projects holding them) read and
// write exactly as they always did.
type Codebook struct {
	Name         string  `json:"name,omitempty" yaml:"name,omitempty"`
	Key          string  `json:"key,omitempty" yaml:"key,omitempty"`
	Question     string  `json:"question" yaml:"question"`
	Scale        Scale   `json:"scale,omitempty" yaml:"scale,omitempty"`
	Classes      []Class `json:"classes" yaml:"classes"`
	Instructions string  `json:"instructions,omitempty" yaml:"instructions,omitempty"`
	// Questions are the follow-up questions, in the order they are asked.
	Questions []Question `json:"questions,omitempty" yaml:"questions,omitempty"`
}

// FirstQuestion is the key of a codebook's first question when it has none.
const FirstQuestion = "main"

// Question is one question of a codebook.
type Question struct {
	Key          string     `json:"key" yaml:"key"`
	Question     string     `json:"question" yaml:"question"`
	Scale        Scale      `json:"scale,omitempty" yaml:"scale,omitempty"`
	Classes      []Class    `json:"classes" yaml:"classes"`
	Instructions string     `json:"instructions,omitempty" yaml:"instructions,omitempty"`
	When         *Condition `json:"when,omitempty" yaml:"when,omitempty"`
}

// Condition says when a follow-up question is asked: when the answer to
// Question is one of the classes In.
type Condition struct {
	Question string   `json:"question" yaml:"question"`
	In       []string `json:"in" yaml:"in"`
}

// Tree reports whether the codebook has follow-up questions.
func (c Codebook) Tree() bool { return len(c.Questions) > 0 }

// FirstKey is the first question's key (FirstQuestion when Key is empty).
func (c Codebook) FirstKey() string {
	if c.Key == "" {
		return FirstQuestion
	}
	return c.Key
}

// All returns every question, the first one first.
func (c Codebook) All() []Question {
	out := []Question{{Key: c.FirstKey(), Question: c.Question, Scale: c.Scale, Classes: c.Classes, Instructions: c.Instructions}}
	return append(out, c.Questions...)
}

// QuestionIndex returns the position of the question with the given key in
// All; the empty key names the first question.
func (c Codebook) QuestionIndex(key string) (int, bool) {
	if key == "" || key == c.FirstKey() {
		return 0, true
	}
	for i, q := range c.Questions {
		if q.Key == key {
			return i + 1, true
		}
	}
	return -1, false
}

// Sub returns question q (an index into All) as a one-question codebook, for
// the parts of the tool that work one question at a time.
func (c Codebook) Sub(q int) Codebook {
	x := c.All()[q]
	return Codebook{Name: c.Name, Key: x.Key, Question: x.Question, Scale: x.Scale, Classes: x.Classes, Instructions: x.Instructions}
}

// Asked reports whether question q (an index into All) is asked of an item
// given the answers so far (question key → class key; a missing key means
// not answered): the first question and unconditional follow-ups always, a
// conditional one when its parent's answer is one of its classes.
func (c Codebook) Asked(q int, answers map[string]string) bool {
	if q == 0 {
		return true
	}
	w := c.Questions[q-1].When
	if w == nil {
		return true
	}
	a, ok := answers[w.Question]
	if w.Question == "" {
		a, ok = answers[c.FirstKey()]
	}
	if !ok {
		return false
	}
	for _, in := range w.In {
		if in == a {
			return true
		}
	}
	return false
}

// Parent returns the index (into All) of the question a follow-up's
// condition names, or -1 for the first question and unconditional ones.
func (c Codebook) Parent(q int) int {
	if q == 0 || c.Questions[q-1].When == nil {
		return -1
	}
	p, _ := c.QuestionIndex(c.Questions[q-1].When.Question)
	return p
}

// Validate checks the codebook's rules and says which one is broken.
func (c *Codebook) Validate() error {
	if err := validQuestion("", Question{Question: c.Question, Scale: c.Scale, Classes: c.Classes}, "the codebook needs a question"); err != nil {
		return err
	}
	if len(c.Questions) == 0 {
		if c.Key != "" {
			return checkKey("key", c.Key)
		}
		return nil
	}
	keys := map[string]int{c.FirstKey(): 0}
	if err := checkKey("key", c.FirstKey()); err != nil {
		return err
	}
	for i, q := range c.Questions {
		f := fmt.Sprintf("questions[%d]", i)
		if err := checkKey(f+".key", q.Key); err != nil {
			return err
		}
		if j, ok := keys[q.Key]; ok {
			if j == 0 {
				return fmt.Errorf("%s.key: %q is the first question's key", f, q.Key)
			}
			return fmt.Errorf("%s.key: %q is already the key of an earlier question", f, q.Key)
		}
		keys[q.Key] = i + 1
		if err := validQuestion(f+".", q, "question "+q.Key+" has no text"); err != nil {
			return err
		}
	}
	all := c.All()
	for i, q := range c.Questions {
		if q.When == nil {
			continue
		}
		f := fmt.Sprintf("questions[%d].when", i)
		p, ok := keys[q.When.Question]
		if !ok {
			return fmt.Errorf("%s.question: %q is not a question of this codebook (questions: %s)", f, q.When.Question, strings.Join(questionKeys(all), ", "))
		}
		if p == i+1 {
			return fmt.Errorf("%s.question: question %q is conditioned on itself", f, q.Key)
		}
		if len(q.When.In) == 0 {
			return fmt.Errorf("%s.in: no answers listed, so question %q is never asked (unreachable)", f, q.Key)
		}
		pc := Codebook{Classes: all[p].Classes}
		for j, v := range q.When.In {
			if _, ok := pc.Index(v); !ok {
				return fmt.Errorf("%s.in[%d]: %q is not a class of question %q (classes: %s)", f, j, v, all[p].Key, strings.Join(pc.Keys(), ", "))
			}
		}
	}
	// Cycles: follow each question's chain of parents.
	for i := range c.Questions {
		seen := map[int]bool{}
		for q := i + 1; q > 0; q = c.Parent(q) {
			if seen[q] {
				return fmt.Errorf("questions[%d].when: the conditions form a cycle through question %q, so it is never asked (unreachable)", i, c.Questions[i].Key)
			}
			seen[q] = true
		}
	}
	return nil
}

func questionKeys(qs []Question) []string {
	out := make([]string, len(qs))
	for i, q := range qs {
		out[i] = q.Key
	}
	return out
}

func checkKey(field, k string) error {
	if strings.TrimSpace(k) == "" {
		return fmt.Errorf("%s: empty question key", field)
	}
	if strings.IndexFunc(k, func(r rune) bool { return unicode.IsControl(r) || unicode.IsSpace(r) || r == ',' }) >= 0 {
		return fmt.Errorf("%s: %q: a question key is one word without spaces, commas or control characters", field, k)
	}
	return nil
}

// validQuestion checks one question's text, scale and classes; prefix is
// the field path before "question", "scale", "classes".
func validQuestion(prefix string, q Question, noText string) error {
	if strings.TrimSpace(q.Question) == "" {
		return fmt.Errorf("%squestion: %s", prefix, noText)
	}
	switch q.Scale {
	case "", Nominal, Ordinal:
	default:
		return fmt.Errorf("%sscale: %q is not nominal or ordinal", prefix, q.Scale)
	}
	if len(q.Classes) < 2 {
		return fmt.Errorf("%sclasses: need at least two classes, have %d", prefix, len(q.Classes))
	}
	if len(q.Classes) > MaxClasses {
		return fmt.Errorf("%sclasses: %d classes; at most %d are supported (the consensus keeps a class in one byte): merge rare classes or split the question in two", prefix, len(q.Classes), MaxClasses)
	}
	seen := make(map[string]int, len(q.Classes))
	for i, cl := range q.Classes {
		if strings.TrimSpace(cl.Key) == "" {
			return fmt.Errorf("%sclasses[%d].key: empty class key", prefix, i)
		}
		if strings.IndexFunc(cl.Key, unicode.IsControl) >= 0 {
			return fmt.Errorf("%sclasses[%d].key: %q holds a control character", prefix, i, cl.Key)
		}
		if j, ok := seen[cl.Key]; ok {
			return fmt.Errorf("%sclasses[%d].key: %q repeats classes[%d]", prefix, i, cl.Key, j)
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
// Rules: Item names a known item, Annotator is non-empty, Question is the
// key of a codebook question ("" means the first), Class is a key of that
// question's classes. Time is when the answer was given (zero if unknown);
// Seconds is the time spent on it (0 if unknown, never negative).
// Wave is the crowd wave the label belongs to (1 … MaxWave): a later run
// of the crowd over the same items, to measure test–retest reliability.
// 0 means unset: the project's open wave when the label is added (1 until
// a new wave is opened), and wave 1 when read back.
type Label struct {
	Item      string    `json:"item"`
	Annotator string    `json:"annotator"`
	Question  string    `json:"question,omitempty"`
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
// model version that gave it; Round the round it was given in. Question is
// the key of the question it answers in a question tree ("" for the first
// question, as in every machine label written before question trees).
type MachineLabel struct {
	Item       string    `json:"item"`
	Question   string    `json:"question,omitempty"`
	Class      string    `json:"class"`
	Confidence float64   `json:"confidence"`
	Proba      []float64 `json:"proba,omitempty"`
	Model      string    `json:"model"`
	Round      int       `json:"round"`
}
