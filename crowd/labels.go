package crowd

import (
	"fmt"
	"math"

	"handoff"
)

// Labels holds crowd labels in column form: label j says that annotator
// Annotator[j] gave class Class[j] to item Item[j].
//
// Rules: Item, Annotator and Class have the same length; Seconds and Time are
// either nil (unknown for every label) or of that length too. Item indices are
// in [0, NItems), annotator indices in [0, NAnnotators), classes in
// [0, NClasses) with 2 ≤ NClasses ≤ 255. Seconds is the time spent on a label
// (0 means unknown); Time is when it was given in Unix nanoseconds (0 means
// unknown). Labels need not be sorted; the combining methods are fastest when
// they are sorted by item. Indices are int32, so at most 2³¹−1 items or
// annotators; the number of labels is limited only by memory (9 bytes per
// label without Seconds and Time).
type Labels struct {
	Item      []int32
	Annotator []int32
	Class     []uint8
	Seconds   []float32
	Time      []int64

	NItems, NAnnotators, NClasses int
}

// Len returns the number of labels.
func (l *Labels) Len() int { return len(l.Item) }

// Check panics if the column lengths disagree (a programmer error) and
// returns an error naming the first label whose index is out of range.
func (l *Labels) Check() error {
	n := len(l.Item)
	if len(l.Annotator) != n || len(l.Class) != n {
		panic(fmt.Sprintf("crowd: Labels columns differ in length: Item %d, Annotator %d, Class %d", n, len(l.Annotator), len(l.Class)))
	}
	if l.Seconds != nil && len(l.Seconds) != n {
		panic(fmt.Sprintf("crowd: Labels.Seconds has length %d, want %d or nil", len(l.Seconds), n))
	}
	if l.Time != nil && len(l.Time) != n {
		panic(fmt.Sprintf("crowd: Labels.Time has length %d, want %d or nil", len(l.Time), n))
	}
	if l.NClasses < 2 || l.NClasses > 255 {
		return fmt.Errorf("crowd: NClasses is %d; need 2 to 255 classes", l.NClasses)
	}
	if l.NItems < 0 || l.NAnnotators < 0 {
		return fmt.Errorf("crowd: negative NItems (%d) or NAnnotators (%d)", l.NItems, l.NAnnotators)
	}
	ni, na, nc := int32(l.NItems), int32(l.NAnnotators), uint8(l.NClasses)
	for j := 0; j < n; j++ {
		if it := l.Item[j]; it < 0 || it >= ni {
			return fmt.Errorf("crowd: label %d: item index %d out of range [0,%d)", j, it, ni)
		}
		if a := l.Annotator[j]; a < 0 || a >= na {
			return fmt.Errorf("crowd: label %d: annotator index %d out of range [0,%d)", j, a, na)
		}
		if c := l.Class[j]; c >= nc {
			return fmt.Errorf("crowd: label %d: class %d out of range [0,%d)", j, c, nc)
		}
		if l.Seconds != nil {
			if s := l.Seconds[j]; s < 0 || math.IsNaN(float64(s)) || math.IsInf(float64(s), 0) {
				return fmt.Errorf("crowd: label %d: seconds %v is not a finite non-negative number", j, s)
			}
		}
	}
	return nil
}

// checkGold panics if gold has the wrong length and returns an error for a
// class out of range.
func checkGold(gold []int, nItems, nClasses int) error {
	if gold == nil {
		return nil
	}
	if len(gold) != nItems {
		panic(fmt.Sprintf("crowd: gold has length %d, want NItems = %d", len(gold), nItems))
	}
	for i, g := range gold {
		if g < -1 || g >= nClasses {
			return fmt.Errorf("crowd: gold for item %d is class %d, want -1 or [0,%d)", i, g, nClasses)
		}
	}
	return nil
}

// Index maps the string ids of items, annotators and classes to the indices
// used in Labels, and back: Items[i] is the id of item i.
type Index struct {
	Items      []string
	Annotators []string
	Classes    []string

	item      map[string]int32
	annotator map[string]int32
	class     map[string]uint8
}

// Item returns the index of the item with the given id.
func (ix *Index) Item(id string) (int, bool) { i, ok := ix.item[id]; return int(i), ok }

// Annotator returns the index of the annotator with the given id.
func (ix *Index) Annotator(id string) (int, bool) { a, ok := ix.annotator[id]; return int(a), ok }

// Build converts labels to column form. Classes are numbered in codebook
// order; items in the order of items, or, when items is nil, in order of first
// appearance among the labels; annotators in order of first appearance. Items
// listed but never labelled are kept (they get NLabels 0 and a plain "no
// labels" mark from the combining methods). A label naming an item not in
// items, an unknown class key, a negative or non-finite Seconds, or a repeated
// item id is an error that names the label.
func Build(labels []handoff.Label, cb *handoff.Codebook, items []string) (*Labels, *Index, error) {
	if cb == nil {
		return nil, nil, fmt.Errorf("crowd: Build needs a codebook")
	}
	if err := cb.Validate(); err != nil {
		return nil, nil, fmt.Errorf("crowd: codebook: %w", err)
	}
	if len(cb.Classes) > 255 {
		return nil, nil, fmt.Errorf("crowd: codebook has %d classes; at most 255 are supported", len(cb.Classes))
	}
	ix := &Index{
		Classes:   cb.Keys(),
		item:      make(map[string]int32, len(items)),
		annotator: make(map[string]int32),
		class:     make(map[string]uint8, len(cb.Classes)),
	}
	for i, k := range ix.Classes {
		ix.class[k] = uint8(i)
	}
	for _, id := range items {
		if _, dup := ix.item[id]; dup {
			return nil, nil, fmt.Errorf("crowd: item id %q is listed twice", id)
		}
		ix.item[id] = int32(len(ix.Items))
		ix.Items = append(ix.Items, id)
	}
	n := len(labels)
	l := &Labels{
		Item:      make([]int32, n),
		Annotator: make([]int32, n),
		Class:     make([]uint8, n),
		NClasses:  len(cb.Classes),
	}
	var anyTime, anySec bool
	for _, lb := range labels {
		anyTime = anyTime || !lb.Time.IsZero()
		anySec = anySec || lb.Seconds != 0
	}
	if anyTime {
		l.Time = make([]int64, n)
	}
	if anySec {
		l.Seconds = make([]float32, n)
	}
	for j, lb := range labels {
		it, ok := ix.item[lb.Item]
		if !ok {
			if items != nil {
				return nil, nil, fmt.Errorf("crowd: label %d: unknown item %q", j, lb.Item)
			}
			it = int32(len(ix.Items))
			ix.item[lb.Item] = it
			ix.Items = append(ix.Items, lb.Item)
		}
		if lb.Annotator == "" {
			return nil, nil, fmt.Errorf("crowd: label %d (item %q): empty annotator id", j, lb.Item)
		}
		a, ok := ix.annotator[lb.Annotator]
		if !ok {
			a = int32(len(ix.Annotators))
			ix.annotator[lb.Annotator] = a
			ix.Annotators = append(ix.Annotators, lb.Annotator)
		}
		c, ok := ix.class[lb.Class]
		if !ok {
			return nil, nil, fmt.Errorf("crowd: label %d (item %q, annotator %q): class %q is not in the codebook %v", j, lb.Item, lb.Annotator, lb.Class, ix.Classes)
		}
		if lb.Seconds < 0 || math.IsNaN(lb.Seconds) || math.IsInf(lb.Seconds, 0) {
			return nil, nil, fmt.Errorf("crowd: label %d (item %q, annotator %q): seconds %v is not a finite non-negative number", j, lb.Item, lb.Annotator, lb.Seconds)
		}
		l.Item[j], l.Annotator[j], l.Class[j] = it, a, c
		if anyTime && !lb.Time.IsZero() {
			l.Time[j] = lb.Time.UnixNano()
		}
		if anySec {
			l.Seconds[j] = float32(lb.Seconds)
		}
	}
	l.NItems = len(ix.Items)
	l.NAnnotators = len(ix.Annotators)
	return l, ix, nil
}

// Gold converts expert answers to a per-item slice (class index or -1). An
// unknown item or class key, or two different answers for one item, is an
// error.
func (ix *Index) Gold(gold []handoff.Gold) ([]int, error) {
	out := make([]int, len(ix.Items))
	for i := range out {
		out[i] = -1
	}
	for j, g := range gold {
		i, ok := ix.item[g.Item]
		if !ok {
			return nil, fmt.Errorf("crowd: gold %d: unknown item %q", j, g.Item)
		}
		c, ok := ix.class[g.Class]
		if !ok {
			return nil, fmt.Errorf("crowd: gold %d (item %q): class %q is not in the codebook %v", j, g.Item, g.Class, ix.Classes)
		}
		if out[i] >= 0 && out[i] != int(c) {
			return nil, fmt.Errorf("crowd: gold %d: item %q has two different gold answers (%q and %q)", j, g.Item, ix.Classes[out[i]], g.Class)
		}
		out[i] = int(c)
	}
	return out, nil
}

// Consensus converts a result to one handoff.Consensus per item, in item
// order. Items with no labels after cleaning and no gold get Labels 0 and the
// class prior as posterior; callers should report them as "no labels".
func (ix *Index) Consensus(r *Result) []handoff.Consensus {
	if r.NItems != len(ix.Items) || r.NClasses != len(ix.Classes) {
		panic(fmt.Sprintf("crowd: result is %d items × %d classes, index %d × %d", r.NItems, r.NClasses, len(ix.Items), len(ix.Classes)))
	}
	out := make([]handoff.Consensus, r.NItems)
	for i := range out {
		p := append([]float64(nil), r.Row(i)...)
		m := r.Method
		if r.IsGold != nil && r.IsGold[i] {
			m = "gold"
		}
		out[i] = handoff.Consensus{Item: ix.Items[i], Class: ix.Classes[r.Class[i]], Posterior: p, Method: m, Labels: int(r.NLabels[i])}
	}
	return out
}

// byItem is a view of labels grouped by item: the labels of item i are
// positions start[i] to start[i+1] of ann and cls (and of pos, the index into
// the original Labels, when it was asked for).
type byItem struct {
	start []int
	ann   []int32
	cls   []uint8
	pos   []int32
}

// groupByItem groups labels by item, keeping the original order within an
// item. When the labels are already sorted by item and positions are not
// needed, the columns are shared, not copied.
func groupByItem(l *Labels, needPos bool) *byItem {
	n := l.Len()
	g := &byItem{start: make([]int, l.NItems+1)}
	sorted := true
	for j := 0; j < n; j++ {
		g.start[l.Item[j]+1]++
		if j > 0 && l.Item[j] < l.Item[j-1] {
			sorted = false
		}
	}
	for i := 0; i < l.NItems; i++ {
		g.start[i+1] += g.start[i]
	}
	if sorted && !needPos {
		g.ann, g.cls = l.Annotator, l.Class
		return g
	}
	g.ann = make([]int32, n)
	g.cls = make([]uint8, n)
	if needPos {
		g.pos = make([]int32, n)
	}
	next := make([]int, l.NItems)
	copy(next, g.start[:l.NItems])
	for j := 0; j < n; j++ {
		i := l.Item[j]
		p := next[i]
		next[i]++
		g.ann[p], g.cls[p] = l.Annotator[j], l.Class[j]
		if needPos {
			g.pos[p] = int32(j)
		}
	}
	return g
}

// Subset returns the labels j for which keep(j) is true, in order, with the
// same NItems, NAnnotators and NClasses; Seconds and Time are kept when l
// has them (empty, not nil, when nothing is kept).
func (l *Labels) Subset(keep func(j int) bool) *Labels {
	out := &Labels{NItems: l.NItems, NAnnotators: l.NAnnotators, NClasses: l.NClasses}
	if l.Seconds != nil {
		out.Seconds = []float32{}
	}
	if l.Time != nil {
		out.Time = []int64{}
	}
	for j := range l.Item {
		if !keep(j) {
			continue
		}
		out.Item = append(out.Item, l.Item[j])
		out.Annotator = append(out.Annotator, l.Annotator[j])
		out.Class = append(out.Class, l.Class[j])
		if l.Seconds != nil {
			out.Seconds = append(out.Seconds, l.Seconds[j])
		}
		if l.Time != nil {
			out.Time = append(out.Time, l.Time[j])
		}
	}
	return out
}
