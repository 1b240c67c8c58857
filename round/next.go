package round

import (
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strings"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/learner"
	"handoff/selector"
	"handoff/store"
)

// NextConfig says which items to send to people next.
type NextConfig struct {
	// Overrides change batch settings for this batch only (batch, shares,
	// strategy, diversity, density, balanced, seed). Without them Next
	// returns exactly the batch the latest round chose; with them it picks
	// the batch again from the latest round's scores and stores it as that
	// round's batch (so the board and the file agree).
	Overrides []Override
	// Audit > 0 asks instead for that many random machine-labelled items
	// not audited before, to measure the real error after handoff.
	Audit int
	// BelowThreshold asks instead for the items autolabel left below the
	// threshold; N > 0 caps how many.
	BelowThreshold bool
	N              int
}

// batchKeys are the settings Next may override.
var batchKeys = []string{"batch", "shares", "strategy", "diversity", "density", "balanced", "seed"}

// current is the latest round as later commands see it: the snapshot, the
// round record, its scores and its batch.
type current struct {
	sn      *store.Snapshot
	p       *project
	s       *state
	r       *Result
	sc      *scores
	batch   []BatchItem
	machine map[string]handoff.MachineLabel
}

func loadCurrent(st *store.Store, withModel bool) (*current, error) {
	opt := store.SnapshotOptions{Times: true}
	if withModel {
		opt.ModelOf = func(rec []byte) (string, error) {
			if rec == nil {
				return "", nil
			}
			var r struct {
				Model string `json:"model"`
			}
			if err := json.Unmarshal(rec, &r); err != nil {
				return "", err
			}
			return r.Model, nil
		}
	}
	sn, err := st.Snapshot(opt)
	if err != nil {
		return nil, err
	}
	if sn.Round == nil {
		return nil, fmt.Errorf("%w: no round yet; run `loop round DIR` first", ErrNothing)
	}
	c := &current{sn: sn, machine: machineMap(sn.Machine)}
	if c.r, err = decodeResult(*sn.Round); err != nil {
		return nil, err
	}
	if c.p, err = projectOf(sn); err != nil {
		return nil, err
	}
	if c.s, err = decodeState(sn.State[stateName]); err != nil {
		return nil, err
	}
	if c.sc, err = decodeScores(sn.State[scoresState]); err != nil {
		return nil, err
	}
	if c.sc == nil || c.sc.Round != c.r.Round {
		return nil, fmt.Errorf("%w: round %d has no stored scores (it was run by an older loop); run `loop round DIR --force`", ErrNothing, c.r.Round)
	}
	if sn.Selection != nil && sn.Selection.N == c.r.Round {
		if err := json.Unmarshal(sn.Selection.Data, &c.batch); err != nil {
			return nil, fmt.Errorf("reading round %d's batch: %w", c.r.Round, err)
		}
	}
	return c, nil
}

// labelCounts returns the crowd labels per item position as stored now.
func (c *current) labelCounts() []int {
	n := make([]int, len(c.p.items))
	for _, i := range c.p.labels.Item {
		n[i]++
	}
	return n
}

// Next returns the next batch: the latest round's batch as it chose it (the
// same items with the same reasons; in a question tree with the asks of a
// question added since the round, stored as the round's batch), or with
// NextConfig.Overrides a batch
// picked again from the latest round's scores, or an audit, or the items
// below the threshold. An audit batch is remembered, so that the verdict can
// report the error of machine labels once people have labelled them.
func Next(st *store.Store, cfg NextConfig, source string) ([]BatchItem, error) {
	for _, o := range cfg.Overrides {
		if !slices.Contains(batchKeys, o.Key) {
			return nil, &SettingError{Key: o.Key, Value: o.Value, Want: "one of the batch settings " + strings.Join(batchKeys, ", ")}
		}
	}
	if cfg.Audit < 0 || cfg.N < 0 {
		return nil, &SettingError{Key: "audit", Value: fmt.Sprint(cfg.Audit), Want: "an integer ≥ 1"}
	}
	rc := DefaultConfig()
	for _, o := range cfg.Overrides { // check the values before touching the store
		if err := rc.Set(o.Key, o.Value); err != nil {
			return nil, err
		}
	}
	needModel := false
	for _, o := range cfg.Overrides {
		needModel = needModel || o.Key == "diversity" && o.Value != "off" || o.Key == "density" && o.Value != "0"
	}
	c, err := loadCurrent(st, needModel)
	if err != nil {
		return nil, err
	}
	switch {
	case cfg.Audit > 0:
		return c.audit(st, cfg.Audit, source)
	case cfg.BelowThreshold:
		if len(c.s.Queue) == 0 {
			return nil, fmt.Errorf("%w: no items wait below the threshold; run `loop autolabel DIR` first", ErrNothing)
		}
		n := c.labelCounts()
		var out []BatchItem
		for _, id := range c.s.Queue {
			i, ok := c.p.index[id]
			if !ok || n[i] > 0 {
				continue
			}
			it := c.p.items[i]
			out = append(out, BatchItem{Item: id, Reason: "below-threshold", Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent})
			if cfg.N > 0 && len(out) == cfg.N {
				break
			}
		}
		return out, nil
	case len(cfg.Overrides) == 0:
		return c.withAdded(st, source)
	}
	// Pick again with the changed batch settings.
	rc = c.r.Config
	for _, o := range cfg.Overrides {
		if err := rc.Set(o.Key, o.Value); err != nil {
			return nil, err
		}
	}
	if err := rc.Validate(); err != nil {
		return nil, err
	}
	if rc.Strategy == selector.Committee {
		return nil, fmt.Errorf("the committee strategy refits the model: run `loop round DIR --strategy committee --force` instead")
	}
	cr, err := c.storedConsensus(rc)
	if err != nil {
		return nil, err
	}
	K := len(c.p.cb.Classes)
	meets := func(i int) bool {
		if c.p.gold[i] >= 0 {
			return true
		}
		if cr.nlabels[i] == 0 {
			return false
		}
		row := cr.posterior[i*K : (i+1)*K]
		return row[floats.MaxIdx(row)] >= rc.Standard.Level || int(cr.nlabels[i]) >= rc.Standard.Cap
	}
	if c.s.HeldOut == nil {
		return nil, fmt.Errorf("the rounds' state has no held-out set; run `loop round DIR --force`")
	}
	pool := buildPool(c.p, cr, c.sc, c.s.HeldOut.Kind, c.s.HeldOut, c.machine, meets)
	if needModel {
		m, err := learner.ReadMachine(bytesReader(c.sn.Model))
		if err != nil {
			return nil, fmt.Errorf("reading model %s: %w", c.r.Model, err)
		}
		var idx []int
		var items []handoff.Item
		for i, it := range c.p.items {
			if it.Kind == m.Kind {
				idx = append(idx, i)
				items = append(items, it)
			}
		}
		x, err := m.Featurise(items)
		if err != nil {
			return nil, err
		}
		pool.Features = spread(x, idx, len(c.p.items))
	}
	if c.sn.Codebook.Tree() && (rc.Strategy == "" || rc.Strategy == selector.Entropy) {
		qs, err := loadQuestionScores(c.sn, c.sc)
		if err != nil {
			return nil, err
		}
		if pool.Uncertainty, err = treeUncertainty(c.sn.Codebook, pool, qs); err != nil {
			return nil, err
		}
	}
	batch, err := pickBatch(c.p, pool, rc, c.r.Round, c.machine)
	if err != nil {
		return nil, err
	}
	// The round's asks of follow-up questions stay in the batch.
	var asks []BatchItem
	for _, b := range c.batch {
		if len(b.Questions) > 0 {
			asks = append(asks, b)
		}
	}
	batch = withAsks(batch, asks, rc.Batch)
	b, err := json.Marshal(batch)
	if err != nil {
		return nil, err
	}
	var desc []string
	for _, o := range cfg.Overrides {
		desc = append(desc, o.Key+"="+o.Value)
	}
	err = st.CommitRound(store.RoundWrite{Round: c.r.Round, Selection: b, Action: "selection.put",
		Detail: fmt.Sprintf("round %d's batch picked again with %s: %d items", c.r.Round, strings.Join(desc, ", "), len(batch))}, source)
	return batch, err
}

// storedConsensus lays the stored consensus out per item position; labels
// added since count as crowd labels without a consensus yet.
func (c *current) storedConsensus(cfg Config) (*consensusResult, error) {
	post, nl := posteriorsOf(c.p, c.sn.Consensus)
	cr := &consensusResult{posterior: post, nlabels: make([]int32, len(nl)), cs: c.sn.Consensus}
	now := c.labelCounts()
	K := len(c.p.cb.Classes)
	for i, n := range nl {
		cr.nlabels[i] = int32(n)
		if n == 0 && now[i] > 0 {
			// Labelled since the round: not unlabelled any more, and not
			// judged by a consensus that did not see its labels.
			cr.nlabels[i] = int32(now[i])
			row := cr.posterior[i*K : (i+1)*K]
			clear(row)
			for k := range row {
				row[k] = 1 / float64(K)
			}
		}
	}
	return cr, nil
}

// audit picks n random machine-labelled items that were not audited
// before and have no crowd labels, and remembers them.
func (c *current) audit(st *store.Store, n int, source string) ([]BatchItem, error) {
	if len(c.machine) == 0 {
		return nil, fmt.Errorf("%w: no machine labels to audit; run `loop autolabel DIR` first", ErrNothing)
	}
	counts := c.labelCounts()
	done := setOf(c.s.Audit)
	pool := selector.Pool{State: make([]selector.State, len(c.p.items))}
	open := 0
	for i, it := range c.p.items {
		pool.State[i] = selector.Excluded
		if _, ok := c.machine[it.ID]; ok && counts[i] == 0 && !done[it.ID] && c.p.gold[i] < 0 {
			pool.State[i] = selector.Machine
			open++
		}
	}
	if open == 0 {
		return nil, fmt.Errorf("%w: every machine-labelled item has been audited or labelled by people already", ErrNothing)
	}
	plan := selector.Plan{Audit: n, NoRefill: true, Seed: c.r.Config.Seed + 7919*uint64(len(c.s.Audit)+1)}
	batch, err := picksToBatch(c.p, pool, plan, c.machine)
	if err != nil {
		return nil, err
	}
	err = st.UpdateState(stateName, "audit.put", source, func(old []byte) ([]byte, string, error) {
		s, err := decodeState(old)
		if err != nil {
			return nil, "", err
		}
		for _, b := range batch {
			s.Audit = append(s.Audit, b.Item)
		}
		data, err := s.encode()
		return data, fmt.Sprintf("%d items sent for audit (%d in all)", len(batch), len(s.Audit)), err
	})
	if err != nil {
		return nil, err
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
	Scored    int     `json:"scored"`   // items of the model's kind without crowd labels or gold
	Labelled  int     `json:"labelled"` // machine labels written (the first question's in a question tree)
	Queued    int     `json:"queued"`   // below the threshold: left for people
	Unscored  int     `json:"unscored"` // added since the round: no score yet
	Bound     float64 `json:"bound"`    // the verdict's upper bound on disagreement at that threshold
	// Questions are every question's part in a question tree, first
	// question first (empty for a one-question project).
	Questions []AutolabelQuestion `json:"questions,omitempty"`
}

// AutolabelQuestion is one question's part of an autolabel in a question
// tree: written only when the question has GO (or with Force), on the
// items it reaches.
type AutolabelQuestion struct {
	Key       string  `json:"key"`
	Go        bool    `json:"go"`
	Threshold float64 `json:"threshold,omitempty"`
	Bound     float64 `json:"bound,omitempty"`
	Scored    int     `json:"scored"`   // items reached, without labels of the question, with a score
	Labelled  int     `json:"labelled"` // machine labels written
	Why       string  `json:"why,omitempty"`
}

// ErrThreshold is wrapped by the errors of a threshold outside (0, 1].
var ErrThreshold = errors.New("threshold")

// Autolabel writes machine labels, with the latest round's scores, for
// every item of the model's kind without crowd labels or gold whose
// confidence is at or above the threshold, and queues the rest for people,
// in one transaction. Without a GO verdict it refuses unless cfg.Force.
func Autolabel(st *store.Store, cfg AutolabelConfig, source string) (*AutolabelReport, error) {
	if cfg.Threshold < 0 || cfg.Threshold > 1 {
		return nil, &SettingError{Key: "threshold", Value: fmt.Sprint(cfg.Threshold), Want: "auto or a number in (0, 1]"}
	}
	c, err := loadCurrent(st, false)
	if err != nil {
		return nil, err
	}
	d := c.r.Verdict.Decision
	rep := &AutolabelReport{Model: c.r.Model, Round: c.r.Round, Go: d.Go, Forced: cfg.Force && !d.Go}
	tree := c.sn.Codebook.Tree() && len(c.r.Questions) > 0
	anyGo := d.Go
	for _, q := range c.r.Questions {
		anyGo = anyGo || q.Verdict != nil && q.Verdict.Decision.Go
	}
	if !anyGo && !cfg.Force {
		return nil, fmt.Errorf("the latest verdict (round %d) is NOT YET: %s; label more items and run another round, or pass --force to autolabel anyway (the error bound then does not hold)",
			c.r.Round, strings.Join(d.Reasons, "; "))
	}
	// In a question tree the first question is written only with its own
	// GO (or --force); its follow-ups then on their own GO.
	firstOn := d.Go || cfg.Force
	var out []handoff.MachineLabel
	var queue []string
	if firstOn {
		th := cfg.Threshold
		if th <= 0 {
			if !c.r.Verdict.Threshold.Found {
				return nil, fmt.Errorf("the latest verdict found no threshold whose error bound is below %.3g; give one with --threshold", c.r.Verdict.Threshold.MaxError)
			}
			th = c.r.Verdict.Threshold.Threshold
			rep.Bound = c.r.Verdict.Threshold.Upper
		}
		rep.Threshold = th
		keys := c.p.cb.Keys()
		counts := c.labelCounts()
		kind := c.r.Train.Kind
		for i, it := range c.p.items {
			if it.Kind != kind || counts[i] > 0 || c.p.gold[i] >= 0 {
				continue
			}
			row := c.sc.row(i)
			if row == nil {
				rep.Unscored++
				continue
			}
			rep.Scored++
			b := floats.MaxIdx(row)
			if row[b] >= th {
				out = append(out, handoff.MachineLabel{Item: it.ID, Class: keys[b], Confidence: row[b], Proba: slices.Clone(row), Model: c.r.Model, Round: c.r.Round})
			} else {
				queue = append(queue, it.ID)
			}
		}
	}
	if tree {
		first := AutolabelQuestion{Key: c.sn.Codebook.FirstKey(), Go: d.Go, Threshold: rep.Threshold, Bound: rep.Bound, Scored: rep.Scored, Labelled: len(out)}
		if !firstOn {
			first.Why = "NOT YET: left for people"
		}
		more, qs, err := c.autolabelFollowUps(cfg, out)
		if err != nil {
			return nil, err
		}
		rep.Questions = append([]AutolabelQuestion{first}, qs...)
		out = append(out, more...)
	}
	th := rep.Threshold
	rep.Labelled, rep.Queued = len(out), len(queue)
	if tree {
		rep.Labelled = rep.Questions[0].Labelled
	}
	s := c.s.clone()
	if firstOn {
		s.Queue = queue
	}
	sb, err := s.encode()
	if err != nil {
		return nil, err
	}
	err = st.CommitRound(store.RoundWrite{Round: c.r.Round, Machine: out, State: map[string][]byte{stateName: sb}, Action: "autolabel",
		Detail: fmt.Sprintf("model %s at threshold %.4g: %d machine labels, %d left for people", c.r.Model, th, len(out), len(queue))}, source)
	if err != nil {
		return nil, err
	}
	return rep, nil
}

// Stranded lists the items of the latest round's kind without crowd labels
// or gold that neither are in the latest round's batch nor could be picked
// by the next round (as a model-unsure pick, a held-out top-up or an
// audit). Items added since the round count as pickable: the next round
// scores them. It should always be empty; it exists so that tests and
// `loop status` can say so.
func Stranded(st *store.Store) ([]string, error) {
	c, err := loadCurrent(st, false)
	if err != nil {
		return nil, err
	}
	cr, err := c.storedConsensus(c.r.Config)
	if err != nil {
		return nil, err
	}
	held := c.s.HeldOut
	if held == nil {
		return nil, fmt.Errorf("the rounds' state has no held-out set; run `loop round DIR --force`")
	}
	pool := buildPool(c.p, cr, c.sc, held.Kind, held, c.machine, func(int) bool { return true })
	inBatch := setOf(nil)
	for _, b := range c.batch {
		inBatch[b.Item] = true
	}
	var out []string
	for i, it := range c.p.items {
		if it.Kind != held.Kind || cr.nlabels[i] > 0 || c.p.gold[i] >= 0 || inBatch[it.ID] || c.sc.row(i) == nil {
			continue
		}
		switch pool.State[i] {
		case selector.Unlabelled, selector.HeldOutWaiting, selector.Machine:
		default:
			out = append(out, it.ID)
		}
	}
	return out, nil
}
