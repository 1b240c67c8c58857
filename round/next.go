package round

import (
	"fmt"

	"handoff"
	"handoff/features"
	"handoff/selector"
	"handoff/store"
)

// NextConfig says which items to send to people next.
type NextConfig struct {
	// N is the batch size (0 means 200); Shares, Strategy, Beta,
	// Diversity and Balanced are as in Config.
	N         int                         `json:"n"`
	Shares    map[selector.Reason]float64 `json:"shares,omitempty"`
	Strategy  selector.Strategy           `json:"strategy"`
	Beta      float64                     `json:"beta,omitempty"`
	Diversity selector.Metric             `json:"diversity,omitempty"`
	Balanced  bool                        `json:"balanced,omitempty"`
	// Audit > 0 asks instead for that many random machine-labelled items,
	// to measure the real error after handoff.
	Audit int `json:"audit,omitempty"`
	// BelowThreshold asks instead for the items autolabel left below the
	// threshold.
	BelowThreshold bool   `json:"below_threshold,omitempty"`
	Seed           uint64 `json:"seed"`
}

// current is the latest model applied to the stored consensus.
type current struct {
	p       *project
	cr      *consensusResult
	t       *trained
	proba   []float64
	s       *state
	r       *Result
	machine map[string]handoff.MachineLabel
	x       features.Matrix // feature rows of the items of the model's kind…
	idx     []int           // …at these item positions
}

func loadCurrent(st *store.Store) (*current, error) {
	m, r, err := LatestMachine(st)
	if err != nil {
		return nil, err
	}
	p, err := load(st)
	if err != nil {
		return nil, err
	}
	cs, _, err := StoredConsensus(st)
	if err != nil {
		return nil, err
	}
	s, err := loadState(st)
	if err != nil {
		return nil, err
	}
	post, nl := posteriorsOf(p, cs)
	cr := &consensusResult{posterior: post, nlabels: make([]int32, len(nl))}
	for i, n := range nl {
		cr.nlabels[i] = int32(n)
	}
	cr.cs = cs
	K := len(p.cb.Classes)
	// Feature rows of every item of the model's kind, in item order.
	var idx []int
	var items []handoff.Item
	for i, it := range p.items {
		if it.Kind == m.Kind {
			idx = append(idx, i)
			items = append(items, it)
		}
	}
	x, err := m.Featurise(items)
	if err != nil {
		return nil, err
	}
	pr := make([]float64, len(items)*K)
	m.ProbaInto(pr, x)
	proba := make([]float64, len(p.items)*K)
	for j, i := range idx {
		copy(proba[i*K:(i+1)*K], pr[j*K:(j+1)*K])
	}
	machine := map[string]handoff.MachineLabel{}
	if err := st.MachineLabels(func(ml handoff.MachineLabel) error { machine[ml.Item] = ml; return nil }); err != nil {
		return nil, err
	}
	return &current{p: p, cr: cr, t: &trained{m: m}, proba: proba, s: s, r: r, machine: machine, x: x, idx: idx}, nil
}

// Next picks the next batch with the latest round's model and returns it.
// An audit batch is remembered, so that the verdict can report the error of
// machine labels once people have labelled the audited items.
func Next(st *store.Store, cfg NextConfig, source string) ([]BatchItem, error) {
	c, err := loadCurrent(st)
	if err != nil {
		return nil, err
	}
	if cfg.BelowThreshold {
		if len(c.s.Queue) == 0 {
			return nil, fmt.Errorf("%w: no items wait below the threshold; run `loop autolabel DIR` first", ErrNothing)
		}
		var out []BatchItem
		for _, id := range c.s.Queue {
			i, ok := c.p.index[id]
			if !ok || c.cr.nlabels[i] > 0 {
				continue
			}
			it := c.p.items[i]
			out = append(out, BatchItem{Item: id, Reason: "below-threshold", Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent})
			if cfg.N > 0 && len(out) == cfg.N {
				break
			}
		}
		return out, nil
	}
	rc := c.r.Config
	if cfg.N > 0 {
		rc.Batch = cfg.N
	}
	if cfg.Shares != nil {
		rc.Shares = cfg.Shares
	}
	if cfg.Strategy != "" {
		rc.Strategy = cfg.Strategy
	}
	rc.Beta, rc.Diversity, rc.Balanced = cfg.Beta, cfg.Diversity, cfg.Balanced
	if cfg.Seed != 0 {
		rc.Seed = cfg.Seed
	}
	if cfg.Audit > 0 && len(c.machine) == 0 {
		return nil, fmt.Errorf("%w: no machine labels to audit; run `loop autolabel DIR` first", ErrNothing)
	}
	if rc.Diversity != "" || rc.Beta != 0 {
		c.t.all = spread(c.x, c.idx, len(c.p.items)) // rows by item, for density and diversity
	}
	held := setOf(c.s.HeldOut)
	pending := setOf(c.s.PendingHeldOut)
	batch, err := pick(c.p, c.cr, c.t, c.proba, c.t.m.Kind, held, pending, c.machine, rc, cfg.Audit)
	if err != nil {
		return nil, err
	}
	changed := false
	for _, b := range batch {
		switch b.Reason {
		case string(selector.ReasonAudit):
			c.s.Audit = append(c.s.Audit, b.Item)
			changed = true
		case string(selector.ReasonHeldOut):
			if !pending[b.Item] {
				c.s.PendingHeldOut = append(c.s.PendingHeldOut, b.Item)
				changed = true
			}
		}
	}
	if changed {
		if err := c.s.save(st, source); err != nil {
			return nil, err
		}
	}
	return batch, nil
}

// AutolabelConfig configures Autolabel.
type AutolabelConfig struct {
	// Threshold is the confidence at or above which the machine labels an
	// item; 0 means the threshold the latest verdict chose.
	Threshold float64
	// Force autolabels even when the latest verdict is NOT YET.
	Force bool
}

// AutolabelReport says what Autolabel did.
type AutolabelReport struct {
	Model     string  `json:"model"`
	Round     int     `json:"round"`
	Threshold float64 `json:"threshold"`
	Go        bool    `json:"go"`
	Forced    bool    `json:"forced"`
	Scored    int     `json:"scored"`   // unlabelled items of the model's kind
	Labelled  int     `json:"labelled"` // machine labels written
	Queued    int     `json:"queued"`   // below the threshold: left for people
	Bound     float64 `json:"bound"`    // the verdict's upper bound on disagreement at that threshold
}

// Autolabel writes machine labels for every unlabelled item of the model's
// kind whose confidence is at or above the threshold and queues the rest for
// people. Without a GO verdict it refuses unless cfg.Force.
func Autolabel(st *store.Store, cfg AutolabelConfig, source string) (*AutolabelReport, error) {
	c, err := loadCurrent(st)
	if err != nil {
		return nil, err
	}
	d := c.r.Verdict.Decision
	rep := &AutolabelReport{Model: c.r.Model, Round: c.r.Round, Go: d.Go, Forced: cfg.Force && !d.Go}
	if !d.Go && !cfg.Force {
		return nil, fmt.Errorf("the latest verdict (round %d) is NOT YET: %v; label more items and run another round, or pass --force to autolabel anyway (the error bound then does not hold)", c.r.Round, d.Reasons)
	}
	th := cfg.Threshold
	if th <= 0 {
		if !c.r.Verdict.Threshold.Found {
			return nil, fmt.Errorf("the latest verdict found no threshold whose error bound is below %.3g; give one with --threshold", c.r.Verdict.Threshold.MaxError)
		}
		th = c.r.Verdict.Threshold.Threshold
		rep.Bound = c.r.Verdict.Threshold.Upper
	}
	rep.Threshold = th
	K := len(c.p.cb.Classes)
	keys := c.p.cb.Keys()
	var out []handoff.MachineLabel
	c.s.Queue = nil
	for i, it := range c.p.items {
		if it.Kind != c.t.m.Kind || c.cr.nlabels[i] > 0 || c.p.gold[i] >= 0 {
			continue
		}
		rep.Scored++
		row := c.proba[i*K : (i+1)*K]
		b := argmax(row)
		if row[b] >= th {
			out = append(out, handoff.MachineLabel{Item: it.ID, Class: keys[b], Confidence: row[b], Proba: append([]float64(nil), row...), Model: c.t.m.Name, Round: c.r.Round})
		} else {
			c.s.Queue = append(c.s.Queue, it.ID)
		}
	}
	rep.Labelled, rep.Queued = len(out), len(c.s.Queue)
	if err := st.PutMachineLabels(out, source); err != nil {
		return nil, err
	}
	if err := c.s.save(st, source); err != nil {
		return nil, err
	}
	return rep, nil
}
