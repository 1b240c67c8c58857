package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"handoff"
)

// CrowdSpec describes a crowd for planning before a project starts: the
// shares of careful, average and careless annotators and of spammers (who
// answer uniformly at random), labels per item, the number of classes and
// their prevalence, the number of items and of annotators. Annotators are
// drawn as by NewCrowd (spammers are 1.5 times as active as the others, so
// they give a larger share of the labels than of the people).
type CrowdSpec struct {
	Careful, Average, Careless, Spammer float64   // shares of annotators, summing to 1
	LabelsPerItem                       int       // distinct annotators per item, 1 ≤ LabelsPerItem ≤ Annotators
	Classes                             int       // number of classes, ≥ 2
	Prevalence                          []float64 // true class shares (len Classes, summing to 1); nil means uniform
	Items                               int       // items, ≥ 1
	Annotators                          int       // annotators, ≥ 1 (ignored for a sparse crowd)

	// MinLabels and MaxLabels, when MaxLabels > 0, make the crowd sparse,
	// as real crowds are: people arrive, give between MinLabels and
	// MaxLabels labels each (log-uniform) and leave (see Stream), so there
	// are as many people as the labels need. OneClass is then the share of
	// spammers who always give one class (see StreamConfig).
	MinLabels, MaxLabels int
	OneClass             float64
	// Shared confusions of the crowd, naming classes "c1", "c2", … (see
	// Shared): everyone but the careful and the spammers answers To for an
	// item of class From with probability Rate, on top of their own errors.
	Shared []Shared
}

// Sparse reports whether the spec describes a sparse crowd (MaxLabels > 0).
func (s CrowdSpec) Sparse() bool { return s.MaxLabels > 0 }

// Validate checks the spec and says which field is wrong.
func (s CrowdSpec) Validate() error {
	shares := []float64{s.Careful, s.Average, s.Careless, s.Spammer}
	names := []string{"careful", "average", "careless", "spammer"}
	var sum float64
	for i, v := range shares {
		if !(v >= 0 && v <= 1) {
			return fmt.Errorf("sim: crowd spec: %s share %v must lie in [0, 1]", names[i], v)
		}
		sum += v
	}
	if math.Abs(sum-1) > 1e-6 {
		return fmt.Errorf("sim: crowd spec: shares of careful, average, careless and spammer sum to %v, need 1", sum)
	}
	if s.Classes < 2 {
		return fmt.Errorf("sim: crowd spec: classes = %d, need at least 2", s.Classes)
	}
	if s.Prevalence != nil {
		if len(s.Prevalence) != s.Classes {
			return fmt.Errorf("sim: crowd spec: prevalence has %d entries, need one per class (%d)", len(s.Prevalence), s.Classes)
		}
		var p float64
		for i, v := range s.Prevalence {
			if !(v >= 0 && v <= 1) {
				return fmt.Errorf("sim: crowd spec: prevalence[%d] = %v must lie in [0, 1]", i, v)
			}
			p += v
		}
		if math.Abs(p-1) > 1e-6 {
			return fmt.Errorf("sim: crowd spec: prevalence sums to %v, need 1", p)
		}
	}
	if s.Items < 1 {
		return fmt.Errorf("sim: crowd spec: items = %d, need at least 1", s.Items)
	}
	cb := s.Codebook()
	for i, sh := range s.Shared {
		if _, ok := cb.Index(sh.From); !ok {
			return fmt.Errorf("sim: crowd spec: shared[%d]: class %q is not one of c1 … c%d", i, sh.From, s.Classes)
		}
		if _, ok := cb.Index(sh.To); !ok || sh.To == sh.From {
			return fmt.Errorf("sim: crowd spec: shared[%d]: class %q is not one of c1 … c%d other than %q", i, sh.To, s.Classes, sh.From)
		}
		if !(sh.Rate >= 0 && sh.Rate <= 1) {
			return fmt.Errorf("sim: crowd spec: shared[%d]: rate %v must lie in [0, 1]", i, sh.Rate)
		}
	}
	if s.Sparse() {
		if s.MinLabels < 1 || s.MaxLabels < s.MinLabels {
			return fmt.Errorf("sim: crowd spec: labels per annotator %d–%d, need 1 ≤ min ≤ max", s.MinLabels, s.MaxLabels)
		}
		if !(s.OneClass >= 0 && s.OneClass <= 1) {
			return fmt.Errorf("sim: crowd spec: one-class share %v must lie in [0, 1]", s.OneClass)
		}
		if s.LabelsPerItem < 1 {
			return fmt.Errorf("sim: crowd spec: labels per item = %d, need at least 1", s.LabelsPerItem)
		}
		return nil
	}
	if s.Annotators < 1 {
		return fmt.Errorf("sim: crowd spec: annotators = %d, need at least 1", s.Annotators)
	}
	if s.LabelsPerItem < 1 || s.LabelsPerItem > s.Annotators {
		return fmt.Errorf("sim: crowd spec: labels per item = %d, need 1 to annotators (%d)", s.LabelsPerItem, s.Annotators)
	}
	return nil
}

// sparseStream is Stream for a sparse crowd: a Stream crowd answers the
// items in order; the Crowd returned lists the people who came, in order of
// arrival.
func (s CrowdSpec) sparseStream(seed uint64, truth []int, fn func(item, annotator, class int)) (*Crowd, error) {
	oneClass := s.OneClass
	if oneClass == 0 {
		oneClass = -1 // StreamConfig: negative means none
	}
	st, err := NewStream(StreamConfig{MinLabels: s.MinLabels, MaxLabels: s.MaxLabels, Active: max(15, 3*s.LabelsPerItem),
		Mix: Mix{Careful: s.Careful, Average: s.Average, Careless: s.Careless, Spammer: s.Spammer}, OneClass: oneClass, Shared: s.Shared}, seed)
	if err != nil {
		return nil, err
	}
	cb := s.Codebook()
	tasks := make([]Task, len(truth))
	for i, t := range truth {
		tasks[i] = Task{Item: fmt.Sprintf("i%d", i+1), Truth: cb.Classes[t].Key}
	}
	ls, err := st.Answer(cb, nil, tasks, s.LabelsPerItem, 0)
	if err != nil {
		return nil, err
	}
	item := make(map[string]int, len(tasks))
	for i, t := range tasks {
		item[t.Item] = i
	}
	people := st.People()
	idx := make(map[string]int, len(people))
	c := &Crowd{}
	for _, p := range people {
		idx[p.ID] = len(c.Annotators)
		c.Annotators = append(c.Annotators, p.Annotator)
	}
	for _, l := range ls {
		k, _ := cb.Index(l.Class)
		fn(item[l.Item], idx[l.Annotator], k)
	}
	return c, nil
}

// applyShared mixes the spec's shared confusions into the confusion
// matrices (K×K, [true][given]) of everyone but the careful and spammers.
func (s CrowdSpec) applyShared(confs [][]float64, ann []Annotator) {
	cb := s.Codebook()
	k := s.Classes
	for a, m := range confs {
		if ann[a].Type == Careful || ann[a].Type == Spammer {
			continue
		}
		for _, sh := range s.Shared {
			f, _ := cb.Index(sh.From)
			to, _ := cb.Index(sh.To)
			for c := 0; c < k; c++ {
				m[f*k+c] *= 1 - sh.Rate
			}
			m[f*k+to] += sh.Rate
		}
	}
}

// Codebook returns a nominal codebook with the spec's classes keyed "c1",
// "c2", … in order.
func (s CrowdSpec) Codebook() handoff.Codebook {
	cb := handoff.Codebook{Name: "planning", Question: "Which class?", Scale: handoff.Nominal}
	for i := range s.Classes {
		cb.Classes = append(cb.Classes, handoff.Class{Key: fmt.Sprintf("c%d", i+1)})
	}
	return cb
}

// Stream generates the spec's labels without building handoff values, for
// large simulations: fn is called once per label with the item index (0 …
// Items−1, in increasing order), the annotator index (into crowd.Annotators)
// and the class index. Each item's true class is fixed first: the class counts
// are the largest-remainder rounding of Items·Prevalence, shuffled over the
// items. Each item then gets LabelsPerItem distinct annotators drawn in
// proportion to activity, and each answers from their own confusion matrix
// (see Crowd.Confusion). Deterministic given the spec and seed.
func (s CrowdSpec) Stream(seed uint64, fn func(item, annotator, class int)) (truth []int, crowd *Crowd, err error) {
	if err := s.Validate(); err != nil {
		return nil, nil, err
	}
	if s.Sparse() {
		// The people are drawn by the sparse stream below.
		crowd = &Crowd{}
	} else if crowd, err = NewCrowd(CrowdConfig{
		Annotators: s.Annotators,
		Mix:        Mix{Careful: s.Careful, Average: s.Average, Careless: s.Careless, Spammer: s.Spammer},
	}, seed); err != nil {
		return nil, nil, err
	}
	prev := s.Prevalence
	if prev == nil {
		prev = make([]float64, s.Classes)
		for i := range prev {
			prev[i] = 1 / float64(s.Classes)
		}
	}
	truth = make([]int, 0, s.Items)
	for c, n := range allocate(s.Items, prev) {
		for range n {
			truth = append(truth, c)
		}
	}
	r := newRand(seed, 0x9a1)
	r.Shuffle(len(truth), func(i, j int) { truth[i], truth[j] = truth[j], truth[i] })
	if s.Sparse() {
		crowd, err = s.sparseStream(seed, truth, fn)
		return truth, crowd, err
	}

	cb := s.Codebook()
	confs := crowd.confusions(&cb)
	s.applyShared(confs, crowd.Annotators)
	k := s.Classes
	cum := make([][]float64, len(confs)) // cumulative rows for fast draws
	for a, m := range confs {
		c := make([]float64, len(m))
		for row := 0; row < k; row++ {
			var acc float64
			for col := 0; col < k; col++ {
				acc += m[row*k+col]
				c[row*k+col] = acc
			}
		}
		cum[a] = c
	}
	n := len(crowd.Annotators)
	who := make([]int, 0, s.LabelsPerItem)
	var seen map[int]bool // for many labels per item; a scan of who otherwise
	if s.LabelsPerItem > 64 {
		seen = make(map[int]bool)
	}
	taken := func(a int) bool {
		if seen != nil {
			return seen[a]
		}
		for _, b := range who {
			if b == a {
				return true
			}
		}
		return false
	}
	pcg := rand.NewPCG(0, 0)
	ir := rand.New(pcg)
	for item := range s.Items {
		st := derive(seed, 0x17e3, uint64(item))
		pcg.Seed(st, mix64(st))
		who = who[:0]
		clear(seen)
		for tries := 0; len(who) < s.LabelsPerItem; tries++ {
			var a int
			if tries < 20*s.LabelsPerItem+100 {
				a = crowd.activity.draw(ir)
			} else {
				a = ir.IntN(n)
			}
			if !taken(a) {
				if seen != nil {
					seen[a] = true
				}
				who = append(who, a)
			}
		}
		t := truth[item]
		for _, a := range who {
			row := cum[a][t*k : (t+1)*k]
			u := ir.Float64() * row[k-1]
			class := sort.SearchFloat64s(row, u)
			for class < k-1 && row[class] <= u {
				class++
			}
			fn(item, a, min(class, k-1))
		}
	}
	return truth, crowd, nil
}

// Planned is a generated planning crowd with its truth.
type Planned struct {
	Codebook handoff.Codebook
	Labels   []handoff.Label   // no Time or Seconds
	Truth    map[string]string // item ID ("i1", "i2", …) → true class key
	Types    map[string]Type   // annotator ID → true type
}

// Generate builds the spec's labels as handoff values (see Stream).
func (s CrowdSpec) Generate(seed uint64) (*Planned, error) {
	type raw struct{ item, annotator, class int32 }
	var rows []raw
	if s.Items > 0 && s.LabelsPerItem > 0 {
		rows = make([]raw, 0, s.Items*s.LabelsPerItem)
	}
	truth, crowd, err := s.Stream(seed, func(item, a, class int) {
		rows = append(rows, raw{int32(item), int32(a), int32(class)})
	})
	if err != nil {
		return nil, err
	}
	cb := s.Codebook()
	ids := make([]string, s.Items)
	p := &Planned{Codebook: cb, Labels: make([]handoff.Label, len(rows)), Truth: make(map[string]string, len(truth)), Types: crowd.Types()}
	for i, t := range truth {
		ids[i] = fmt.Sprintf("i%d", i+1)
		p.Truth[ids[i]] = cb.Classes[t].Key
	}
	for i, r := range rows {
		p.Labels[i] = handoff.Label{Item: ids[r.item], Annotator: crowd.Annotators[r.annotator].ID, Class: cb.Classes[r.class].Key}
	}
	return p, nil
}
