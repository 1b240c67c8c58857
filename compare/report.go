package compare

import "fmt"

// Options configures the comparisons.
type Options struct {
	Bootstrap Bootstrap `json:"bootstrap"`
	// MinItems is the fewest items coded by both sides for item-level
	// figures (0 means 10); MinParents the fewest parents for parent-level
	// ones (0 means 10). Below them every figure is "no estimate yet".
	MinItems   int `json:"min_items"`
	MinParents int `json:"min_parents"`
}

func (o Options) withDefaults() Options {
	o.Bootstrap = o.Bootstrap.withDefaults()
	if o.MinItems <= 0 {
		o.MinItems = 10
	}
	if o.MinParents <= 0 {
		o.MinParents = 10
	}
	return o
}

// Items is the item-level agreement of two codings (side A against side
// B): accuracy, Cohen's kappa and Krippendorff's alpha with bootstrap
// intervals over the N items both coded, and the confusion matrix
// (Confusion[a][b]: items A gave class a and B class b). Note is set when
// too few items are coded by both for any figure (each then undefined).
type Items struct {
	N         int      `json:"n"`
	Note      string   `json:"note,omitempty"`
	Accuracy  Estimate `json:"accuracy"`
	Kappa     Estimate `json:"kappa"`
	Metric    Metric   `json:"alpha_metric"`
	Alpha     Estimate `json:"alpha"`
	Confusion [][]int  `json:"confusion"`
}

// CompareItems compares two codings of the same items: x[i] and y[i] are
// the classes sides A and B gave item i (−1: no answer). Items both coded
// count; m is the metric of alpha (Ordinal for an ordinal codebook). With
// fewer than o.MinItems such items every figure is undefined.
func CompareItems(x, y []int, k int, m Metric, o Options) *Items {
	checkLen("CompareItems", len(x), len(y), nil)
	o = o.withDefaults()
	var a, b []int
	for i := range x {
		if x[i] >= 0 && y[i] >= 0 {
			if x[i] >= k || y[i] >= k {
				panic(fmt.Sprintf("compare: CompareItems: item %d: class %d or %d out of range [0, %d)", i, x[i], y[i], k))
			}
			a, b = append(a, x[i]), append(b, y[i])
		}
	}
	it := &Items{N: len(a), Metric: m, Confusion: Confusion(a, b, k)}
	if it.N < o.MinItems {
		why := fmt.Sprintf("%d items coded by both sides; need at least %d", it.N, o.MinItems)
		it.Note = why
		it.Accuracy, it.Kappa, it.Alpha = NoEstimate(it.N, why), NoEstimate(it.N, why), NoEstimate(it.N, why)
		return it
	}
	bs := o.Bootstrap
	it.Accuracy = Estimated(it.N, bs, func(w []float64) (float64, error) { return Accuracy(a, b, w) })
	it.Kappa = Estimated(it.N, bs, func(w []float64) (float64, error) { return CohenKappa(a, b, k, w) })
	it.Alpha = Estimated(it.N, bs, func(w []float64) (float64, error) { return alphaPairs(a, b, k, m, w) })
	return it
}

// Point is one parent on a scatter plot: X is side A's value, Y side B's;
// Series names the measure (a class key, or "position").
type Point struct {
	Parent string  `json:"parent"`
	Series string  `json:"series"`
	X      float64 `json:"x"`
	Y      float64 `json:"y"`
}

// Parents is the parent-level agreement of two roll-ups on one measure (a
// class's share, or the mean position on an ordinal scale): each side's
// mean over the N parents, and Pearson's r, Spearman's ρ and the mean
// absolute difference with bootstrap intervals over parents. Min and Max
// are the measure's scale ([0, 1] for a share, [1, K] for a position).
// Note is set when there are too few parents for any figure (each then
// undefined).
type Parents struct {
	Measure  string   `json:"measure"`
	Note     string   `json:"note,omitempty"`
	Label    string   `json:"label"`
	Min      float64  `json:"min"`
	Max      float64  `json:"max"`
	N        int      `json:"n"`
	MeanA    float64  `json:"mean_a"`
	MeanB    float64  `json:"mean_b"`
	Pearson  Estimate `json:"pearson"`
	Spearman Estimate `json:"spearman"`
	MAD      Estimate `json:"mean_abs_diff"`
	Points   []Point  `json:"points"`
}

// CompareParents compares two roll-ups over the same parents: x[g] and
// y[g] are sides A's and B's values for parent names[g]. With fewer than
// o.MinParents parents every figure is undefined.
func CompareParents(measure, label string, lo, hi float64, names []string, x, y []float64, o Options) Parents {
	checkLen("CompareParents", len(x), len(y), nil)
	if len(names) != len(x) {
		panic(fmt.Sprintf("compare: CompareParents: %d names for %d values", len(names), len(x)))
	}
	o = o.withDefaults()
	p := Parents{Measure: measure, Label: label, Min: lo, Max: hi, N: len(x)}
	for g := range x {
		p.Points = append(p.Points, Point{Parent: names[g], Series: measure, X: x[g], Y: y[g]})
		p.MeanA += x[g] / float64(len(x))
		p.MeanB += y[g] / float64(len(x))
	}
	if p.N < o.MinParents {
		why := fmt.Sprintf("%d parents; need at least %d", p.N, o.MinParents)
		p.Note = why
		p.Pearson, p.Spearman, p.MAD = NoEstimate(p.N, why), NoEstimate(p.N, why), NoEstimate(p.N, why)
		return p
	}
	bs := o.Bootstrap
	p.Pearson = Estimated(p.N, bs, func(w []float64) (float64, error) { return Pearson(x, y, w) })
	p.Spearman = Estimated(p.N, bs, func(w []float64) (float64, error) { return Spearman(x, y, w) })
	p.MAD = Estimated(p.N, bs, func(w []float64) (float64, error) { return MeanAbsDiff(x, y, w) })
	return p
}

// Rollup counts, per parent, the classes of its items: counts[g][c] is the
// number of items i with parent[i] = g and class[i] = c (items with class
// −1 or parent −1 are left out).
func Rollup(class, parent []int, parents, k int) [][]int {
	checkLen("Rollup", len(class), len(parent), nil)
	counts := make([][]int, parents)
	for g := range counts {
		counts[g] = make([]int, k)
	}
	for i, c := range class {
		if c >= 0 && parent[i] >= 0 {
			counts[parent[i]][c]++
		}
	}
	return counts
}

// Share is the share of class c in counts, Σ[c]/Σ; ok is false when
// counts are all zero.
func Share(counts []int, c int) (v float64, ok bool) {
	n := 0
	for _, x := range counts {
		n += x
	}
	if n == 0 {
		return 0, false
	}
	return float64(counts[c]) / float64(n), true
}

// Position is the mean position Σ_c (c + 1)·counts[c] / Σ counts (1 = the
// lowest class); ok is false when counts are all zero.
func Position(counts []int) (v float64, ok bool) {
	n, s := 0, 0
	for c, x := range counts {
		n += x
		s += (c + 1) * x
	}
	if n == 0 {
		return 0, false
	}
	return float64(s) / float64(n), true
}

// Comparison is one pair of codings compared: side A (rows of the
// confusion matrix, x axis of the scatter) against side B.
//
// Kind is "reference" (the crowd's consensus against an independent
// coding), "machine" (the machine against an independent coding) or
// "waves" (one crowd wave's consensus against another's). Items is nil
// when the sides share no item-level coding (ItemsNote says why); Parents
// holds one entry per measure (empty when ParentsNote says why).
type Comparison struct {
	Kind        string    `json:"kind"`
	A           string    `json:"a"`
	B           string    `json:"b"`
	Notes       []string  `json:"notes,omitempty"`
	Items       *Items    `json:"items,omitempty"`
	ItemsNote   string    `json:"items_note,omitempty"`
	Parents     []Parents `json:"parents,omitempty"`
	ParentsNote string    `json:"parents_note,omitempty"`
}

// Report is every comparison of a project, with the classes (codebook
// order) and the options used.
type Report struct {
	Classes     []string     `json:"classes"`
	Ordinal     bool         `json:"ordinal"`
	Options     Options      `json:"options"`
	Comparisons []Comparison `json:"comparisons"`
	Notes       []string     `json:"notes,omitempty"`
}
