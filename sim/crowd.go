package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"time"

	"handoff"
)

// Type is an annotator's true type in a simulated crowd.
type Type string

// The annotator types. Careful, average and careless annotators answer from a
// confusion matrix of their own whose diagonal is drawn around the type's
// accuracy (0.93, 0.80, 0.60; standard deviations 0.03, 0.05, 0.08).
// Spammers ignore the item: they answer uniformly at random, or always the
// same class (Annotator.OneClass). Resubmitters answer like a slightly worse
// average annotator (0.75, sd 0.06) but label some items many times over.
const (
	Careful     Type = "careful"
	Average     Type = "average"
	Careless    Type = "careless"
	Spammer     Type = "spammer"
	Resubmitter Type = "resubmitter"
)

var typeAccuracy = map[Type][2]float64{
	Careful: {.93, .03}, Average: {.80, .05}, Careless: {.60, .08}, Resubmitter: {.75, .06},
}

// median seconds per label by type; each annotator's median is drawn around it.
var typeSeconds = map[Type]float64{
	Careful: 14, Average: 9, Careless: 5, Spammer: 1.6, Resubmitter: 7,
}

// Mix gives the shares of annotator types in a crowd. Shares must be
// non-negative with a positive sum; they are normalised, and the number of
// annotators of each type is the largest-remainder rounding of
// Annotators·share, so the realised shares are as close as whole people allow.
type Mix struct {
	Careful, Average, Careless, Spammer, Resubmitter float64
}

// DefaultMix is the demo crowd: 25% careful, 40% average, 15% careless, 10%
// spammers and 10% resubmitters.
func DefaultMix() Mix {
	return Mix{Careful: .25, Average: .40, Careless: .15, Spammer: .10, Resubmitter: .10}
}

func (m Mix) shares() []float64 {
	return []float64{m.Careful, m.Average, m.Careless, m.Spammer, m.Resubmitter}
}

var mixTypes = []Type{Careful, Average, Careless, Spammer, Resubmitter}

// CrowdConfig describes a simulated crowd. Zero fields take the defaults shown.
type CrowdConfig struct {
	Annotators int // number of people (default 40)
	Mix        Mix // shares of types (default DefaultMix)
	// OneClassSpammers is the share of spammers who always give the same
	// class instead of random answers (default 0: all random). The count is
	// rounded to the nearest whole spammer.
	OneClassSpammers float64
	// Resubmit is the chance that a resubmitter, given an item, labels it
	// 6–10 times instead of once (default 0.08).
	Resubmit float64
	// Start is when round 0 begins (default 2026-03-02 08:00 UTC); round r
	// begins at Start + r·RoundGap (default RoundGap 7 days).
	Start    time.Time
	RoundGap time.Duration
}

func (c CrowdConfig) withDefaults() CrowdConfig {
	if c.Annotators == 0 {
		c.Annotators = 40
	}
	if c.Mix == (Mix{}) {
		c.Mix = DefaultMix()
	}
	if c.Resubmit == 0 {
		c.Resubmit = 0.08
	}
	if c.Start.IsZero() {
		c.Start = time.Date(2026, 3, 2, 8, 0, 0, 0, time.UTC)
	}
	if c.RoundGap == 0 {
		c.RoundGap = 7 * 24 * time.Hour
	}
	return c
}

// Annotator is one simulated person with their true, hidden traits.
type Annotator struct {
	ID       string
	Type     Type
	OneClass bool    // a spammer who always gives the same class
	Accuracy float64 // centre of the diagonal of their confusion matrices; 0 for spammers
	Activity float64 // relative chance of being given an item
	Seconds  float64 // median seconds spent per label
	offset   time.Duration
}

// Task is an item the simulated crowd can answer.
//
// Truth is the true class key. Stratum selects a row set of the Bias passed
// to Answer ("" for none). Alt, if set, is a class the item is easily taken
// for: each label independently reads the item as Alt with probability
// Ambiguity (people split on such items; unlike Bias, this is not shared).
type Task struct {
	Item      string
	Truth     string
	Stratum   string
	Alt       string
	Ambiguity float64
}

// Bias is a confusion shared by every annotator, per stratum: Bias[s][i][j]
// is the probability that an item of true class i in stratum s looks like
// class j, rows and columns in codebook order, each row summing to 1. The
// perceived class is drawn once per item — the same for everybody and every
// round — and each annotator's own confusion matrix then applies to it, so
// more labels per item cannot average the bias away.
type Bias map[string][][]float64

// Crowd is a simulated crowd. It is deterministic given its seed and the
// sequence of Answer calls; it is not safe for concurrent use.
type Crowd struct {
	Annotators []Annotator

	cfg        CrowdConfig
	seed       uint64
	activity   *aliasTable            // draws annotators in proportion to activity
	conf       map[string][][]float64 // codebook signature → annotator → K×K row-major
	asked      map[string]int         // labels (distinct annotators) given per item so far
	clock      []time.Time
	clockRound int
}

// NewCrowd draws a crowd: its types (shuffled over the IDs "a001", "a002", …),
// accuracies, activity (log-normal, σ = 0.5; spammers ×1.5)
// and speed (median seconds drawn log-normally, σ = 0.25, around the type's:
// careful 14, average 9, careless 5, spammer 1.6, resubmitter 7).
func NewCrowd(cfg CrowdConfig, seed uint64) (*Crowd, error) {
	cfg = cfg.withDefaults()
	if cfg.Annotators < 1 {
		return nil, fmt.Errorf("sim: crowd: annotators = %d, need at least 1", cfg.Annotators)
	}
	var sum float64
	for i, s := range cfg.Mix.shares() {
		if s < 0 || math.IsNaN(s) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("sim: crowd: mix share of %s is %v, need a finite value ≥ 0", mixTypes[i], s)
		}
		sum += s
	}
	if sum <= 0 {
		return nil, fmt.Errorf("sim: crowd: mix shares sum to %v, need a positive sum", sum)
	}
	if cfg.OneClassSpammers < 0 || cfg.OneClassSpammers > 1 || cfg.Resubmit < 0 || cfg.Resubmit > 1 {
		return nil, fmt.Errorf("sim: crowd: one-class spammers %v and resubmit %v must lie in [0, 1]", cfg.OneClassSpammers, cfg.Resubmit)
	}
	r := newRand(seed, 0xc40d)
	counts := allocate(cfg.Annotators, cfg.Mix.shares())
	types := make([]Type, 0, cfg.Annotators)
	for i, n := range counts {
		for range n {
			types = append(types, mixTypes[i])
		}
	}
	r.Shuffle(len(types), func(i, j int) { types[i], types[j] = types[j], types[i] })
	oneClass := int(math.Round(cfg.OneClassSpammers * float64(counts[3])))
	width := len(fmt.Sprint(cfg.Annotators))
	if width < 3 {
		width = 3
	}
	c := &Crowd{cfg: cfg, seed: seed, conf: map[string][][]float64{}, asked: map[string]int{}, clockRound: -1}
	act := make([]float64, 0, len(types))
	for i, t := range types {
		a := Annotator{ID: fmt.Sprintf("a%0*d", width, i+1), Type: t}
		if t == Spammer {
			if oneClass > 0 {
				a.OneClass = true
				oneClass--
			}
		} else {
			m := typeAccuracy[t]
			a.Accuracy = clamp(m[0]+m[1]*r.NormFloat64(), 0.3, 0.99)
		}
		a.Activity = lognormal(r, 1, 0.5)
		if t == Spammer {
			a.Activity *= 1.5
		}
		a.Seconds = lognormal(r, typeSeconds[t], 0.25)
		a.offset = time.Duration(r.Float64() * float64(10*time.Hour)).Truncate(time.Second)
		act = append(act, a.Activity)
		c.Annotators = append(c.Annotators, a)
	}
	c.activity = newAliasTable(act)
	return c, nil
}

// Types returns each annotator's true type by ID.
func (c *Crowd) Types() map[string]Type {
	m := make(map[string]Type, len(c.Annotators))
	for _, a := range c.Annotators {
		m[a.ID] = a.Type
	}
	return m
}

func signature(cb *handoff.Codebook) string {
	return string(cb.Scale) + "|" + strings.Join(cb.Keys(), "|")
}

// Confusion returns annotator i's own confusion matrix for the codebook:
// entry [t][l] is the probability of answering class l for an item perceived
// as class t, in codebook order. For careful, average, careless and
// resubmitting annotators each diagonal entry is Accuracy + N(0, 0.03²),
// clipped to [1/K + 0.02, 0.995]; the rest of the row is spread by
// exponential weights, for an ordinal codebook damped by exp(−1.2(|t−l|−1)) so
// that mistakes fall mostly on neighbouring classes. A random spammer's rows
// are uniform; a one-class spammer's rows all put 1 on one class.
func (c *Crowd) Confusion(cb handoff.Codebook, i int) [][]float64 {
	m := c.confusions(&cb)[i]
	k := len(cb.Classes)
	out := make([][]float64, k)
	for t := range out {
		out[t] = append([]float64(nil), m[t*k:(t+1)*k]...)
	}
	return out
}

func (c *Crowd) confusions(cb *handoff.Codebook) [][]float64 {
	sig := signature(cb)
	if m, ok := c.conf[sig]; ok {
		return m
	}
	k := len(cb.Classes)
	ms := make([][]float64, len(c.Annotators))
	for i, a := range c.Annotators {
		r := newRand(c.seed, 0xc0f, uint64(i), hashString(sig))
		ms[i] = personConfusion(r, a.Type, a.OneClass, a.Accuracy, k, cb.IsOrdinal())
	}
	c.conf[sig] = ms
	return ms
}

// personConfusion draws a K×K row-major confusion matrix (see Crowd.Confusion).
func personConfusion(r *rand.Rand, t Type, oneClass bool, acc float64, k int, ordinal bool) []float64 {
	m := make([]float64, k*k)
	if t == Spammer {
		fixed := r.IntN(k)
		for row := 0; row < k; row++ {
			for col := 0; col < k; col++ {
				switch {
				case !oneClass:
					m[row*k+col] = 1 / float64(k)
				case col == fixed:
					m[row*k+col] = 1
				}
			}
		}
		return m
	}
	w := make([]float64, k)
	for row := 0; row < k; row++ {
		d := clamp(acc+0.03*r.NormFloat64(), 1/float64(k)+0.02, 0.995)
		var sum float64
		for col := range w {
			w[col] = 0
			if col == row {
				continue
			}
			w[col] = r.ExpFloat64() + 0.05
			if ordinal {
				dist := math.Abs(float64(col - row))
				w[col] *= math.Exp(-1.2 * (dist - 1))
			}
			sum += w[col]
		}
		for col := range w {
			if col == row {
				m[row*k+col] = d
			} else {
				m[row*k+col] = (1 - d) * w[col] / sum
			}
		}
	}
	return m
}

// pickAnnotators returns the first need distinct annotators of the item's own
// sequence: draws in proportion to activity from a generator seeded by the
// crowd's seed and the item ID, repeats skipped. Asking again for a larger
// need extends the same sequence, so later rounds add new people.
func (c *Crowd) pickAnnotators(item string, need int) []int {
	n := len(c.Annotators)
	if need > n {
		need = n
	}
	r := newRand(c.seed, 0xa551, hashString(item))
	seen := make(map[int]bool, need)
	out := make([]int, 0, need)
	for tries := 0; len(out) < need && tries < 20*need+100; tries++ {
		a := c.activity.draw(r)
		if !seen[a] {
			seen[a] = true
			out = append(out, a)
		}
	}
	if len(out) < need { // very uneven activity: fill from a permutation
		for _, a := range r.Perm(n) {
			if len(out) == need {
				break
			}
			if !seen[a] {
				seen[a] = true
				out = append(out, a)
			}
		}
	}
	return out
}

// Answer has the crowd label tasks (a next batch) in round round ≥ 0: each
// task gets labels from labelsPerItem annotators who have not yet labelled it
// in earlier calls (fewer if the crowd runs out of people), chosen in
// proportion to activity. A resubmitter may add 5–9 extra labels for the
// same item. Labels come in task order.
//
// Each label is drawn as follows: the item's perceived class is drawn once
// from bias[task.Stratum] (or is the truth when bias has no such stratum);
// with probability task.Ambiguity the annotator reads it as task.Alt instead;
// the answer is drawn from the annotator's confusion row of that class
// (spammers ignore the item). Seconds spent are log-normal around the
// annotator's median (σ = 0.35), at least 0.3 s, rounded to 0.1 s; each
// annotator works through their labels of the round one after another from
// the round's start plus a personal offset of up to 10 hours.
//
// The result depends only on the crowd's seed, the round, the task and how
// many labels the item was given before.
func (c *Crowd) Answer(cb handoff.Codebook, bias Bias, tasks []Task, labelsPerItem, round int) ([]handoff.Label, error) {
	if err := cb.Validate(); err != nil {
		return nil, fmt.Errorf("sim: answer: codebook: %w", err)
	}
	if labelsPerItem < 1 {
		return nil, fmt.Errorf("sim: answer: labels per item = %d, need at least 1", labelsPerItem)
	}
	if round < 0 {
		return nil, fmt.Errorf("sim: answer: round = %d, need ≥ 0", round)
	}
	k := len(cb.Classes)
	if err := bias.check(k); err != nil {
		return nil, err
	}
	confs := c.confusions(&cb)
	if round != c.clockRound {
		c.clockRound = round
		c.clock = make([]time.Time, len(c.Annotators))
		start := c.cfg.Start.Add(time.Duration(round) * c.cfg.RoundGap)
		for i, a := range c.Annotators {
			c.clock[i] = start.Add(a.offset)
		}
	}
	labels := make([]handoff.Label, 0, len(tasks)*labelsPerItem)
	for ti, t := range tasks {
		truth, ok := cb.Index(t.Truth)
		if !ok {
			return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): truth %q is not a codebook class", ti, t.Item, t.Truth)
		}
		alt := -1
		if t.Alt != "" {
			if alt, ok = cb.Index(t.Alt); !ok {
				return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): alt %q is not a codebook class", ti, t.Item, t.Alt)
			}
		}
		if t.Ambiguity < 0 || t.Ambiguity > 1 || math.IsNaN(t.Ambiguity) {
			return nil, fmt.Errorf("sim: answer: tasks[%d] (%s): ambiguity %v outside [0, 1]", ti, t.Item, t.Ambiguity)
		}
		h := hashString(t.Item)
		perceived := truth
		if rows, ok := bias[t.Stratum]; ok {
			perceived = categorical(newRand(c.seed, 0x9e4c, h), rows[truth])
		}
		n0 := c.asked[t.Item]
		who := c.pickAnnotators(t.Item, n0+labelsPerItem)[min(n0, len(c.Annotators)):]
		c.asked[t.Item] = n0 + len(who)
		r := newRand(c.seed, 0x1abe, h, uint64(round), uint64(n0))
		for _, a := range who {
			copies := 1
			if c.Annotators[a].Type == Resubmitter && r.Float64() < c.cfg.Resubmit {
				copies = 6 + r.IntN(5)
			}
			for range copies {
				p := perceived
				if alt >= 0 && r.Float64() < t.Ambiguity {
					p = alt
				}
				class := categorical(r, confs[a][p*k:(p+1)*k])
				secs := math.Round(math.Max(0.3, lognormal(r, c.Annotators[a].Seconds, 0.35))*10) / 10
				at := c.clock[a]
				c.clock[a] = at.Add(time.Duration((secs + lognormal(r, 3, 0.5)) * float64(time.Second))).Truncate(time.Millisecond)
				labels = append(labels, handoff.Label{
					Item: t.Item, Annotator: c.Annotators[a].ID, Class: cb.Classes[class].Key,
					Time: at, Seconds: secs,
				})
			}
		}
	}
	return labels, nil
}

func (b Bias) check(k int) error {
	for s, rows := range b {
		if len(rows) != k {
			return fmt.Errorf("sim: bias[%q]: %d rows, need %d (one per class)", s, len(rows), k)
		}
		for i, row := range rows {
			if len(row) != k {
				return fmt.Errorf("sim: bias[%q][%d]: %d entries, need %d", s, i, len(row), k)
			}
			var sum float64
			for j, v := range row {
				if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("sim: bias[%q][%d][%d] = %v, need a finite value ≥ 0", s, i, j, v)
				}
				sum += v
			}
			if math.Abs(sum-1) > 1e-9 {
				return fmt.Errorf("sim: bias[%q][%d] sums to %v, need 1", s, i, sum)
			}
		}
	}
	return nil
}

// RunConfig says which tasks the crowd labels in a first round (round 0) and
// which get expert answers. Zero fields take the defaults shown.
type RunConfig struct {
	LabelsPerItem int // distinct annotators per labelled item (default 5)
	// Labelled is the share of tasks given labels, in (0, 1] (default 1).
	// The choice is stratified: within every (stratum, true class) cell,
	// round(Labelled·n) tasks are drawn at random, so strata whose true
	// class mix is equal keep it equal among the labelled tasks.
	Labelled float64
	// Gold is the share of labelled tasks, per stratum and rounded, that
	// get an expert answer (default 0: none).
	Gold       float64
	GoldSource string // Gold.Source (default "sim-expert")
}

// Result is what a Run produced.
type Result struct {
	Labels   []handoff.Label
	Gold     []handoff.Gold    // expert answers (the truth) for the gold items, in task order
	Truth    map[string]string // item ID → true class key, for every task
	Labelled []string          // IDs of the labelled tasks, in task order
}

// Run has the crowd label a share of tasks in round 0 (see RunConfig and
// Answer) and draws the gold items among them.
func (c *Crowd) Run(cb handoff.Codebook, bias Bias, tasks []Task, cfg RunConfig) (*Result, error) {
	if cfg.LabelsPerItem == 0 {
		cfg.LabelsPerItem = 5
	}
	if cfg.Labelled == 0 {
		cfg.Labelled = 1
	}
	if cfg.GoldSource == "" {
		cfg.GoldSource = "sim-expert"
	}
	if !(cfg.Labelled > 0 && cfg.Labelled <= 1) || !(cfg.Gold >= 0 && cfg.Gold <= 1) {
		return nil, fmt.Errorf("sim: run: labelled share %v must lie in (0, 1] and gold share %v in [0, 1]", cfg.Labelled, cfg.Gold)
	}
	res := &Result{Truth: make(map[string]string, len(tasks))}
	for i, t := range tasks {
		if _, dup := res.Truth[t.Item]; dup {
			return nil, fmt.Errorf("sim: run: tasks[%d]: item %q appears twice", i, t.Item)
		}
		res.Truth[t.Item] = t.Truth
	}
	r := newRand(c.seed, 0x5e1ec7)
	chosen := stratifiedPick(r, len(tasks), cfg.Labelled, func(i int) string { return tasks[i].Stratum + "\x00" + tasks[i].Truth })
	sel := make([]Task, 0, len(tasks))
	for i, t := range tasks {
		if chosen[i] {
			sel = append(sel, t)
			res.Labelled = append(res.Labelled, t.Item)
		}
	}
	var err error
	if res.Labels, err = c.Answer(cb, bias, sel, cfg.LabelsPerItem, 0); err != nil {
		return nil, err
	}
	gold := stratifiedPick(r, len(sel), cfg.Gold, func(i int) string { return sel[i].Stratum })
	for i, t := range sel {
		if gold[i] {
			res.Gold = append(res.Gold, handoff.Gold{Item: t.Item, Class: t.Truth, Source: cfg.GoldSource})
		}
	}
	return res, nil
}

// stratifiedPick marks round(share·n) random members of every cell.
func stratifiedPick(r *rand.Rand, n int, share float64, cell func(int) string) []bool {
	cells := map[string][]int{}
	var order []string
	for i := 0; i < n; i++ {
		k := cell(i)
		if _, ok := cells[k]; !ok {
			order = append(order, k)
		}
		cells[k] = append(cells[k], i)
	}
	out := make([]bool, n)
	for _, k := range order {
		idx := cells[k]
		m := int(math.Round(share * float64(len(idx))))
		for _, j := range r.Perm(len(idx))[:m] {
			out[idx[j]] = true
		}
	}
	return out
}
