package round

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"slices"

	"handoff"
	"handoff/crowd"
	"handoff/learner"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

// Config is one round's configuration. Zero values take the defaults shown.
type Config struct {
	Consensus ConsensusConfig `json:"consensus"`
	Train     TrainConfig     `json:"train"`
	// HeldOutShare of the crowd-labelled items is reserved for the verdict
	// at the first round (0 means 0.1), at least HeldOutMin items where there
	// are that many (0 means 200) but never more than half of them.
	HeldOutShare float64 `json:"held_out_share"`
	HeldOutMin   int     `json:"held_out_min"`
	// Batch is the size of the next batch (0 means 200); Shares splits it
	// over the reasons (nil means model-unsure 0.6, held-out top-up 0.2,
	// crowd-split 0.1, model-vs-crowd conflict 0.1).
	Batch  int                         `json:"batch"`
	Shares map[selector.Reason]float64 `json:"shares,omitempty"`
	// Strategy, Beta, Diversity and Balanced configure the model-unsure
	// picks (see selector.Plan).
	Strategy  selector.Strategy `json:"strategy"`
	Beta      float64           `json:"beta,omitempty"`
	Diversity selector.Metric   `json:"diversity,omitempty"`
	Balanced  bool              `json:"balanced,omitempty"`
	// StopSet is the size of the fixed random stop set of the stopping rule
	// (0 means 1000).
	StopSet int `json:"stop_set"`
	// Verdict configures the verdict (max error, confidence, bootstrap).
	Verdict verdict.Options `json:"verdict"`
	// Seed seeds every random choice of the round.
	Seed uint64 `json:"seed"`
}

// DefaultConfig returns the defaults.
func DefaultConfig() Config {
	return Config{Consensus: DefaultConsensus(), Seed: 1}
}

func (c *Config) defaults() {
	if c.Consensus.Method == "" {
		r := c.Consensus.Rules
		c.Consensus = DefaultConsensus()
		if r != (crowd.Rules{}) {
			c.Consensus.Rules = r
		}
	}
	if c.HeldOutShare <= 0 {
		c.HeldOutShare = 0.1
	}
	if c.HeldOutMin <= 0 {
		c.HeldOutMin = 200
	}
	if c.Batch <= 0 {
		c.Batch = 200
	}
	if c.Shares == nil {
		c.Shares = map[selector.Reason]float64{selector.ReasonUnsure: 0.6, selector.ReasonHeldOut: 0.2, selector.ReasonSplit: 0.1, selector.ReasonConflict: 0.1}
	}
	if c.Strategy == "" {
		c.Strategy = selector.Entropy
	}
	if c.StopSet <= 0 {
		c.StopSet = 1000
	}
	if c.Verdict.MaxError <= 0 {
		c.Verdict.MaxError = 0.05
	}
	if c.Verdict.Confidence <= 0 {
		c.Verdict.Confidence = 0.95
	}
	c.Verdict.Seed = c.Seed
	c.Consensus.Seed = c.Seed
	c.Train.Seed = c.Seed
}

// BatchItem is one item of a next batch with the reason it was picked.
type BatchItem struct {
	Item   string  `json:"item"`
	Reason string  `json:"reason"`
	Score  float64 `json:"score"`
	Kind   string  `json:"kind"`
	Text   string  `json:"text,omitempty"`
	Path   string  `json:"path,omitempty"`
	Parent string  `json:"parent,omitempty"`
	// Machine is the model's class for conflict picks, for the expert.
	Machine string `json:"machine,omitempty"`
	// Crowd is the consensus class for conflict and split picks. It is
	// shown to experts only; the labelling page never shows it.
	Crowd string `json:"crowd,omitempty"`
}

// Result is one stored round.
type Result struct {
	Round       int              `json:"round"`
	Fingerprint string           `json:"fingerprint"` // of the round's inputs
	Model       string           `json:"model"`
	Config      Config           `json:"config"`
	Consensus   *ConsensusReport `json:"consensus"`
	Train       *TrainReport     `json:"train"`
	HeldOut     int              `json:"held_out"` // labelled held-out items the verdict used
	Pool        int              `json:"pool"`     // unlabelled items of the model's kind
	Verdict     *verdict.Report  `json:"verdict"`
	Batch       []BatchItem      `json:"batch"`
}

// Run runs one round: clean and combine → train → score the unlabelled pool
// → pick the next batch → verdict. It stores the consensus, the model, the
// round record and its selection, and returns the round.
func Run(st *store.Store, cfg Config, source string) (*Result, error) {
	cfg.defaults()
	p, err := load(st)
	if err != nil {
		return nil, err
	}
	s, err := loadState(st)
	if err != nil {
		return nil, err
	}
	cr, err := consensus(p, cfg.Consensus)
	if err != nil {
		return nil, err
	}
	K := len(p.cb.Classes)
	kind := cfg.Train.Kind
	if kind == "" {
		kind = projectKind(p)
		cfg.Train.Kind = kind
	}
	labelled := func(i int) bool { return cr.nlabels[i] > 0 || p.gold[i] >= 0 }
	// The held-out set: reserved once, topped up by the items picked for it.
	var lab []string
	for i, it := range p.items {
		if it.Kind == kind && labelled(i) {
			lab = append(lab, it.ID)
		}
	}
	if len(lab) == 0 {
		return nil, fmt.Errorf("%w: no crowd-labelled %s items yet; add labels with `loop labels add`", ErrNothing, kind)
	}
	if len(s.HeldOut) == 0 {
		n := max(int(math.Round(cfg.HeldOutShare*float64(len(lab)))), min(cfg.HeldOutMin, len(lab)))
		n = min(n, len(lab)/2)
		s.HeldOut = sample(lab, n, cfg.Seed, 1)
	}
	var still []string
	for _, id := range s.PendingHeldOut {
		if i, ok := p.index[id]; ok && labelled(i) {
			s.HeldOut = append(s.HeldOut, id)
		} else {
			still = append(still, id)
		}
	}
	slices.Sort(s.HeldOut)
	s.PendingHeldOut = still
	held := setOf(s.HeldOut)
	pending := setOf(s.PendingHeldOut)
	var rows []int
	for i, it := range p.items {
		if it.Kind == kind && labelled(i) && !held[it.ID] {
			rows = append(rows, i)
		}
	}
	if len(rows) == 0 {
		return nil, fmt.Errorf("%w: every labelled item is held out; label more items", ErrNothing)
	}
	t, err := train(p, cr.posterior, rows, cfg.Train)
	if err != nil {
		return nil, err
	}
	s.Round++
	t.m.Name = fmt.Sprintf("r%d-%s", s.Round, t.m.Fingerprint[:8])
	t.rep.Version = t.m.Name
	// Score every item of the kind.
	proba := make([]float64, len(p.items)*K)
	t.m.ProbaInto(proba, t.all)
	machine := map[string]handoff.MachineLabel{}
	if err := st.MachineLabels(func(m handoff.MachineLabel) error { machine[m.Item] = m; return nil }); err != nil {
		return nil, err
	}
	// Pool: unlabelled items of the kind.
	var pool []int
	for i, it := range p.items {
		if it.Kind == kind && !labelled(i) {
			pool = append(pool, i)
		}
	}
	if len(s.StopSet) == 0 && len(pool) > 0 {
		ids := make([]string, len(pool))
		for j, i := range pool {
			ids[j] = p.items[i].ID
		}
		s.StopSet = sample(ids, cfg.StopSet, cfg.Seed, 2)
	}
	var stopPred []int
	for _, id := range s.StopSet {
		if i, ok := p.index[id]; ok {
			stopPred = append(stopPred, argmax(proba[i*K:(i+1)*K]))
		}
	}
	s.StopPreds = append(s.StopPreds, stopPred)
	// Verdict on the held-out set.
	in := verdict.Input{Classes: p.cb.Keys(), StopSet: s.StopPreds}
	for _, id := range s.HeldOut {
		i := p.index[id]
		in.Truth = append(in.Truth, argmax(cr.posterior[i*K:(i+1)*K]))
		in.Proba = append(in.Proba, slices.Clone(proba[i*K:(i+1)*K]))
	}
	for _, i := range pool {
		if _, done := machine[p.items[i].ID]; !done {
			in.Archive = append(in.Archive, slices.Max(proba[i*K:(i+1)*K]))
		}
	}
	right := 0
	for j := range in.Truth {
		if argmax(in.Proba[j]) == in.Truth[j] {
			right++
		}
	}
	errRate := 0.0
	if len(in.Truth) > 0 {
		errRate = 1 - float64(right)/float64(len(in.Truth))
	}
	s.Curve = append(s.Curve, verdict.CurvePoint{Labels: len(rows), Error: errRate})
	in.Curve = s.Curve
	if ag, err := crowd.Agree(cr.kept, crowd.AgreementOptions{Reps: -1, Seed: cfg.Seed}); err == nil {
		for _, l := range ag.LeaveOneOut {
			if l.Kappa.Defined {
				in.Annotators = append(in.Annotators, verdict.Annotator{ID: p.anns[l.Annotator], Kappa: l.Kappa.Value, Items: l.Kappa.N})
			}
		}
	}
	if a := auditCounts(p, cr, s, machine); a != nil {
		in.Audit = a
	}
	rep, err := verdict.Compute(in, cfg.Verdict)
	if err != nil {
		return nil, fmt.Errorf("verdict: %w", err)
	}
	// The next batch.
	batch, err := pick(p, cr, t, proba, kind, held, pending, machine, cfg, 0)
	if err != nil {
		return nil, err
	}
	for _, b := range batch {
		if b.Reason == string(selector.ReasonHeldOut) {
			s.PendingHeldOut = append(s.PendingHeldOut, b.Item)
		}
	}
	res := &Result{
		Round: s.Round, Model: t.m.Name, Config: cfg, Consensus: cr.report, Train: t.rep,
		HeldOut: len(in.Truth), Pool: len(pool), Verdict: rep, Batch: batch,
	}
	res.Fingerprint = fingerprint(p, cfg)
	// Store: consensus, model, round, selection, state.
	meta, err := json.Marshal(cr.report)
	if err != nil {
		return nil, err
	}
	if err := st.PutConsensus(cr.cs, meta, source); err != nil {
		return nil, err
	}
	mb, err := learner.MarshalMachine(t.m)
	if err != nil {
		return nil, err
	}
	if err := st.PutModel(t.m.Name, mb, source); err != nil {
		return nil, err
	}
	rb, err := json.Marshal(res)
	if err != nil {
		return nil, err
	}
	if err := st.PutRound(s.Round, rb, source); err != nil {
		return nil, err
	}
	sb, err := json.Marshal(batch)
	if err != nil {
		return nil, err
	}
	if err := st.PutSelection(s.Round, sb, source); err != nil {
		return nil, err
	}
	if err := s.save(st, source); err != nil {
		return nil, err
	}
	return res, nil
}

// auditCounts compares machine labels with the consensus of audited items
// that people have labelled since.
func auditCounts(p *project, cr *consensusResult, s *state, machine map[string]handoff.MachineLabel) *verdict.AuditCounts {
	if len(s.Audit) == 0 {
		return nil
	}
	K := len(p.cb.Classes)
	keys := p.cb.Keys()
	a := &verdict.AuditCounts{}
	for _, id := range s.Audit {
		i, ok := p.index[id]
		m, ok2 := machine[id]
		if !ok || !ok2 || cr.nlabels[i] == 0 {
			continue
		}
		a.Items++
		if keys[argmax(cr.posterior[i*K:(i+1)*K])] != m.Class {
			a.Errors++
		}
	}
	if a.Items == 0 {
		return nil
	}
	return a
}

// pick builds the selector's pool and plan and returns the next batch.
// audit > 0 asks for that many random machine-labelled items instead.
func pick(p *project, cr *consensusResult, t *trained, proba []float64, kind handoff.Kind,
	held, pending map[string]bool, machine map[string]handoff.MachineLabel, cfg Config, audit int) ([]BatchItem, error) {
	K := len(p.cb.Classes)
	n := len(p.items)
	pool := selector.Pool{
		State:     make([]selector.State, n),
		Proba:     make([][]float64, n),
		Consensus: make([][]float64, n),
		Labels:    make([]int, n),
		Features:  t.all,
	}
	oofAt := make(map[int]int, len(t.rows))
	for j, i := range t.rows {
		oofAt[i] = j
	}
	for i, it := range p.items {
		pool.Labels[i] = int(cr.nlabels[i])
		switch {
		case it.Kind != kind:
			pool.State[i] = selector.Excluded
		case held[it.ID] || pending[it.ID]:
			pool.State[i] = selector.HeldOut
		case cr.nlabels[i] > 0 || p.gold[i] >= 0:
			pool.State[i] = selector.Labelled
			pool.Consensus[i] = cr.posterior[i*K : (i+1)*K]
			if j, ok := oofAt[i]; ok {
				pool.Proba[i] = t.oof[j*K : (j+1)*K]
			} else {
				pool.Proba[i] = proba[i*K : (i+1)*K]
			}
			if p.gold[i] >= 0 {
				pool.State[i] = selector.Excluded // experts already answered
			}
		case machine[it.ID].Item != "":
			pool.State[i] = selector.Machine
		default:
			pool.State[i] = selector.Unlabelled
			pool.Proba[i] = proba[i*K : (i+1)*K]
		}
	}
	if cfg.Strategy == selector.Committee && audit == 0 {
		var rows []int
		for i, st := range pool.State {
			if st == selector.Unlabelled {
				rows = append(rows, i)
			}
		}
		c, err := committee(t, K, 5, rows, n, cfg.Seed)
		if err != nil {
			return nil, err
		}
		pool.Committee = c
	}
	var plan selector.Plan
	var err error
	if audit > 0 {
		plan = selector.Plan{Audit: audit, NoRefill: true}
	} else {
		plan, err = selector.PlanShares(cfg.Batch, cfg.Shares)
		if err != nil {
			return nil, err
		}
	}
	plan.Strategy, plan.Beta, plan.Diversity, plan.Balanced = cfg.Strategy, cfg.Beta, cfg.Diversity, cfg.Balanced
	plan.SplitBelow = cfg.Consensus.Uncertain
	plan.Seed = cfg.Seed + 1000003*uint64(len(cr.cs))
	picks, err := selector.Select(pool, plan)
	if err != nil {
		return nil, fmt.Errorf("picking the next batch: %w", err)
	}
	keys := p.cb.Keys()
	out := make([]BatchItem, 0, len(picks))
	for _, pk := range picks {
		it := p.items[pk.Item]
		b := BatchItem{Item: it.ID, Reason: string(pk.Reason), Score: pk.Score, Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent}
		switch pk.Reason {
		case selector.ReasonConflict:
			b.Machine = keys[argmax(pool.Proba[pk.Item])]
			b.Crowd = keys[argmax(pool.Consensus[pk.Item])]
		case selector.ReasonSplit:
			b.Crowd = keys[argmax(pool.Consensus[pk.Item])]
		case selector.ReasonAudit:
			b.Machine = machine[it.ID].Class
		}
		out = append(out, b)
	}
	return out, nil
}

// fingerprint hashes a round's inputs: the items, labels and gold it read
// and its configuration.
func fingerprint(p *project, cfg Config) string {
	h := sha256.New()
	for _, it := range p.items {
		h.Write([]byte(it.ID))
		h.Write([]byte(it.Text))
		h.Write([]byte(it.SHA256))
		h.Write([]byte{0})
	}
	var b [8]byte
	l := p.labels
	for j := range l.Item {
		binary.LittleEndian.PutUint32(b[:4], uint32(l.Item[j]))
		binary.LittleEndian.PutUint32(b[4:], uint32(l.Annotator[j]))
		h.Write(b[:])
		h.Write([]byte{l.Class[j]})
	}
	for _, g := range p.gold {
		binary.LittleEndian.PutUint32(b[:4], uint32(int32(g)))
		h.Write(b[:4])
	}
	c, _ := json.Marshal(cfg)
	h.Write(c)
	return hex.EncodeToString(h.Sum(nil))
}

// Latest returns the latest stored round, or ErrNothing when no round was
// run yet.
func Latest(st *store.Store) (*Result, error) {
	rs, err := st.Rounds()
	if err != nil {
		return nil, err
	}
	if len(rs) == 0 {
		return nil, fmt.Errorf("%w: no round yet; run `loop round DIR` first", ErrNothing)
	}
	var r Result
	if err := json.Unmarshal(rs[len(rs)-1].Data, &r); err != nil {
		return nil, fmt.Errorf("reading round %d: %w", rs[len(rs)-1].N, err)
	}
	return &r, nil
}

// LatestMachine returns the model of the latest round.
func LatestMachine(st *store.Store) (*learner.Machine, *Result, error) {
	r, err := Latest(st)
	if err != nil {
		return nil, nil, err
	}
	b, err := st.Model(r.Model)
	if err != nil {
		return nil, nil, fmt.Errorf("reading model %s: %w", r.Model, err)
	}
	m, err := learner.ReadMachine(bytesReader(b))
	if err != nil {
		return nil, nil, err
	}
	cb := st.Codebook()
	if err := m.CheckClasses(cb.Keys()); err != nil {
		return nil, nil, err
	}
	return m, r, nil
}
