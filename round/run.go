package round

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/crowd"
	"handoff/learner"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

// BatchItem is one item of a next batch with the reason it was picked.
type BatchItem struct {
	Item   string  `json:"item"`
	Reason string  `json:"reason"`
	Score  float64 `json:"score"`
	Kind   string  `json:"kind"`
	Text   string  `json:"text,omitempty"`
	Path   string  `json:"path,omitempty"`
	Parent string  `json:"parent,omitempty"`
	// Machine is the model's class for conflict and audit picks, for the
	// expert.
	Machine string `json:"machine,omitempty"`
	// Crowd is the consensus class for conflict and split picks. It is
	// shown to experts only; the labelling page never shows it.
	Crowd string `json:"crowd,omitempty"`
	// Questions are the keys of the questions to ask on the item in a
	// question tree; empty means the whole tree from the first question.
	Questions []string `json:"questions,omitempty"`
}

// Result is one stored round.
type Result struct {
	Round        int               `json:"round"`
	Look         int               `json:"look"`       // the verdict's look (rounds with new labels so far)
	NewLabels    bool              `json:"new_labels"` // false for a forced round on the same labels
	Fingerprint  string            `json:"fingerprint"`
	Model        string            `json:"model"`
	Config       Config            `json:"config"`
	Settings     []verdict.Setting `json:"settings"`
	Consensus    *ConsensusReport  `json:"consensus"`
	Train        *TrainReport      `json:"train"`
	HeldOut      int               `json:"held_out"`       // held-out items meeting the reference standard, used by the verdict
	HeldOutSet   int               `json:"held_out_set"`   // members of the held-out set
	HeldOutShare float64           `json:"held_out_share"` // the share of the archive drawn into it at the first round
	Pool         int               `json:"pool"`           // items of the model's kind without crowd labels or gold
	Verdict      *verdict.Report   `json:"verdict"`
	Batch        []BatchItem       `json:"batch"`
	Notes        []string          `json:"notes,omitempty"`
	// Questions are every question's figures in a question tree, first
	// question first (empty for a one-question project).
	Questions []QuestionResult `json:"questions,omitempty"`
}

// ErrNoNewLabels is returned (wrapped) by a round when no label or gold
// answer is new since the last round: the round would change nothing, so it
// is not run (RunOptions.Force runs it anyway). It also matches ErrNothing.
var ErrNoNewLabels error = nothingNew{}

type nothingNew struct{}

func (nothingNew) Error() string        { return "no labels new since the last round" }
func (nothingNew) Is(target error) bool { return target == ErrNothing }

// RunOptions say how a round is run.
type RunOptions struct {
	// Config, when not nil, is used as given; otherwise the project's
	// stored settings (Settings) with Overrides applied for this run.
	Config    *Config
	Overrides []Override
	// Force runs the round even when no label is new since the last one.
	// Such a round is not a look: it adds no point to the learning curve
	// and none to the stop rule.
	Force bool
}

// Run runs one round with cfg as given; see RunWith.
func Run(st *store.Store, cfg Config, source string) (*Result, error) {
	return RunWith(st, RunOptions{Config: &cfg}, source)
}

// RunWith runs one round: a snapshot of the store (one read transaction) →
// clean and combine → train → score the archive → verdict → next batch, in
// memory → one write transaction storing the consensus, the model, the round
// record, its selection, the state and the scores. Without new labels since
// the last round it changes nothing and returns an error wrapping
// ErrNoNewLabels, unless o.Force.
func RunWith(st *store.Store, o RunOptions, source string) (*Result, error) {
	sn, err := st.Snapshot(store.SnapshotOptions{Times: true})
	if err != nil {
		return nil, err
	}
	in, err := inputOf(sn)
	if err != nil {
		return nil, err
	}
	var cfg Config
	var settings []verdict.Setting
	if o.Config != nil {
		cfg = *o.Config
		if err := cfg.Validate(); err != nil {
			return nil, err
		}
		settings = given(&cfg)
	} else {
		cfg, settings, err = configFrom(in.stored, o.Overrides)
		if err != nil {
			return nil, err
		}
	}
	out, err := step(in, cfg, settings, o.Force)
	if err != nil {
		return nil, err
	}
	if err := out.commit(st, source); err != nil {
		return nil, err
	}
	return out.res, nil
}

// roundInput is what a round reads: the snapshot, decoded.
type roundInput struct {
	p        *project
	s        *state
	labelSeq uint64
	machine  []handoff.MachineLabel
	stored   map[string]string // the project's settings keys
	sn       *store.Snapshot
}

func inputOf(sn *store.Snapshot) (*roundInput, error) {
	p, err := projectOf(sn)
	if err != nil {
		return nil, err
	}
	s, err := decodeState(sn.State[stateName])
	if err != nil {
		return nil, err
	}
	m, err := storedKeys(sn.State[settingsState])
	if err != nil {
		return nil, err
	}
	return &roundInput{p: p, s: s, labelSeq: sn.LabelSeq, machine: sn.Machine, stored: m, sn: sn}, nil
}

// roundOutput is everything a round writes.
type roundOutput struct {
	res     *Result
	more    map[string][]byte // the follow-ups' states
	cs      []handoff.Consensus
	csMeta  []byte
	model   string
	mbytes  []byte
	state   []byte
	scores  []byte
	batch   []byte
	records []byte
}

func (o *roundOutput) commit(st *store.Store, source string) error {
	states := map[string][]byte{stateName: o.state, scoresState: o.scores}
	for k, v := range o.more {
		states[k] = v
	}
	return st.CommitRound(store.RoundWrite{
		Round: o.res.Round, Record: o.records, Consensus: o.cs, ConsensusMeta: o.csMeta,
		ModelName: o.model, Model: o.mbytes, Selection: o.batch,
		State:  states,
		Detail: fmt.Sprintf("round %d (look %d), model %s, next batch of %d", o.res.Round, o.res.Look, o.res.Model, len(o.res.Batch)),
	}, source)
}

// step is the round itself: it reads in and touches no store.
func step(in *roundInput, cfg Config, settings []verdict.Setting, force bool) (*roundOutput, error) {
	p := in.p
	s := in.s.clone()
	goldN := 0
	for _, g := range p.gold {
		if g >= 0 {
			goldN++
		}
	}
	fresh := s.Round == 0 || in.labelSeq != s.LabelSeq || goldN != s.Gold
	if !fresh && !force {
		return nil, fmt.Errorf("%w (round %d used all %d labels and %d gold answers): nothing changed; add labels, or pass --force to run the round anyway",
			ErrNoNewLabels, s.Round, p.labels.Len(), goldN)
	}
	cr, err := consensus(p, cfg.Consensus)
	if err != nil {
		return nil, err
	}
	K := len(p.cb.Classes)
	kind := cfg.kindOf(p)
	cfg.Train.Kind = kind
	var notes []string
	labelled := func(i int) bool { return cr.nlabels[i] > 0 || p.gold[i] >= 0 }
	nKind := 0
	anyLabelled := false
	for i, it := range p.items {
		if it.Kind == kind {
			nKind++
			anyLabelled = anyLabelled || labelled(i)
		}
	}
	if !anyLabelled {
		return nil, fmt.Errorf("%w: no crowd-labelled %s items yet; add labels with `loop labels add`", ErrNothing, kind)
	}
	// The held-out set: fixed at the first round.
	minHeld := cfg.HeldOutMin
	if minHeld == 0 {
		minHeld = HeldOutMinFor(cfg.Verdict.MaxError, cfg.Verdict.Confidence)
	}
	if s.HeldOut == nil {
		s.HeldOut = &heldOutSet{Kind: kind, Share: heldOutShareFor(cfg.HeldOutShare, minHeld, nKind), Salt: cfg.Seed, Min: minHeld, Asked: cfg.HeldOutShare}
	} else {
		h := s.HeldOut
		if h.Kind != kind {
			return nil, fmt.Errorf("the held-out set was drawn from the %s items at the first round; this round trains on %s items: set features back to %s (`loop config DIR set features %s`) or start a new project",
				h.Kind, kind, h.Kind, h.Kind)
		}
		if cfg.HeldOutShare != h.Asked || minHeld != h.Min {
			notes = append(notes, fmt.Sprintf("the held-out set was fixed at the first round (a random %.3g of the archive, from held-out %.3g and held-out-min %d); the settings now say held-out %.3g and held-out-min %d, which apply to a new project only",
				h.Share, h.Asked, h.Min, cfg.HeldOutShare, minHeld))
		}
	}
	held := s.HeldOut
	std := cfg.Standard
	meets := func(i int) bool {
		if p.gold[i] >= 0 {
			return true
		}
		if cr.nlabels[i] == 0 {
			return false
		}
		row := cr.posterior[i*K : (i+1)*K]
		return row[floats.MaxIdx(row)] >= std.Level || int(cr.nlabels[i]) >= std.Cap
	}
	var rows []int
	members := 0
	for i, it := range p.items {
		if it.Kind != kind {
			continue
		}
		if held.member(it) {
			members++
			continue
		}
		if labelled(i) {
			rows = append(rows, i)
		}
	}
	if len(rows) == 0 {
		return nil, fmt.Errorf("%w: every labelled %s item is in the held-out set; label items outside it (`loop next` picks them)", ErrNothing, kind)
	}
	t, err := train(p, cr.posterior, rows, cfg.Train)
	if err != nil {
		return nil, err
	}
	s.Round++
	if fresh {
		s.Look++
	}
	look := max(s.Look, 1)
	t.m.Name = fmt.Sprintf("r%d-%s", s.Round, t.m.Fingerprint[:8])
	t.rep.Version = t.m.Name
	// Score every item of the kind.
	proba := make([]float64, len(p.items)*K)
	t.m.ProbaInto(proba, t.all)
	// Scores for the selector and later commands: out-of-fold on the
	// training rows, the model's elsewhere.
	sc := &scores{Round: s.Round, Model: t.m.Name, K: K, rows: make([][]float64, len(p.items))}
	for i, it := range p.items {
		if it.Kind == kind {
			sc.rows[i] = proba[i*K : (i+1)*K]
		}
	}
	for j, i := range t.rows {
		sc.rows[i] = t.oof[j*K : (j+1)*K]
	}
	// Stop set and learning curve: rounds with new labels only.
	if fresh {
		if len(s.StopSet) == 0 {
			var ids []string
			for i, it := range p.items {
				if it.Kind == kind && !labelled(i) && !held.member(it) {
					ids = append(ids, it.ID)
				}
			}
			s.StopSet = sample(ids, cfg.StopSet, cfg.Seed, 2)
		}
		if len(s.StopSet) > 0 {
			var stopPred []int
			for _, id := range s.StopSet {
				if i, ok := p.index[id]; ok {
					stopPred = append(stopPred, floats.MaxIdx(proba[i*K:(i+1)*K]))
				}
			}
			s.StopPreds = append(s.StopPreds, stopPred)
		}
		cp := curveRound{Round: s.Round, Labels: p.labels.Len(), Pred: map[string]int{}}
		for i, it := range p.items {
			if held.member(it) {
				cp.Pred[it.ID] = floats.MaxIdx(proba[i*K : (i+1)*K])
			}
		}
		s.Curve = append(s.Curve, cp)
	}
	s.LabelSeq, s.Gold = in.labelSeq, goldN
	for i, it := range p.items {
		if held.member(it) && labelled(i) {
			if _, ok := s.Cohort[it.ID]; !ok {
				s.Cohort[it.ID] = s.Round
			}
		}
	}
	machine := machineMap(in.machine)
	vin, err := verdictInput(p, cr, s, cfg, func(i int) []float64 { return proba[i*K : (i+1)*K] }, machine, look, t.m.Name, settings, nil)
	if err != nil {
		return nil, err
	}
	rep, err := verdict.Compute(vin.in, cfg.Verdict)
	if err != nil {
		return nil, fmt.Errorf("verdict: %w", err)
	}
	// Every follow-up of a question tree: its consensus, machine and verdict.
	var tr *treeRun
	if in.sn != nil && in.sn.Codebook.Tree() {
		first := QuestionResult{Key: in.sn.Codebook.FirstKey(), Consensus: cr.report, Train: t.rep, Model: t.m.Name, Verdict: rep,
			HeldOut: vin.settled, HeldOutAsked: members}
		first.Alpha, first.AlphaMetric = alphaOf(cr, in.sn.Codebook.Scale == handoff.Ordinal)
		if tr, err = runFollowUps(in, cr, first, t, sc, s, cfg, look, settings); err != nil {
			return nil, err
		}
	}
	// The next batch.
	pool := buildPool(p, cr, sc, kind, held, machine, meets)
	pool.Features = t.all
	if tr != nil && (cfg.Strategy == "" || cfg.Strategy == selector.Entropy) {
		if pool.Uncertainty, err = treeUncertainty(in.sn.Codebook, pool, tr.scores); err != nil {
			return nil, err
		}
	}
	if cfg.Strategy == selector.Committee {
		var cand []int
		for i, st := range pool.State {
			if st == selector.Unlabelled {
				cand = append(cand, i)
			}
		}
		c, err := committee(t, K, 5, cand, len(p.items), cfg.Seed)
		if err != nil {
			return nil, err
		}
		pool.Committee = c
	}
	batch, err := pickBatch(p, pool, cfg, s.Round, machine)
	if err != nil {
		return nil, err
	}
	if tr != nil {
		batch = withAsks(batch, tr.questionAsks(in.sn.Codebook, p, cr, kind, held, cfg.Standard, cfg.Seed+1000003*uint64(s.Round)), cfg.Batch)
	}
	pooled := 0
	for i, it := range p.items {
		if it.Kind == kind && !labelled(i) {
			pooled++
		}
	}
	res := &Result{
		Round: s.Round, Look: look, NewLabels: fresh, Model: t.m.Name, Config: cfg, Settings: settings,
		Consensus: cr.report, Train: t.rep, HeldOut: vin.settled, HeldOutSet: members, HeldOutShare: held.Share,
		Pool: pooled, Verdict: rep, Batch: batch, Notes: notes,
	}
	if tr != nil {
		res.Questions = tr.results
	}
	if !fresh {
		res.Notes = append(res.Notes, "forced: no labels are new since the last round, so this round is not a new look and adds nothing to the learning curve or the stop rule")
	}
	res.Fingerprint = fingerprint(p, cfg)
	out := &roundOutput{res: res, cs: cr.cs, model: t.m.Name}
	if tr != nil {
		out.more = tr.states
	}
	if out.csMeta, err = json.Marshal(cr.report); err != nil {
		return nil, err
	}
	if out.mbytes, err = learner.MarshalMachine(t.m); err != nil {
		return nil, err
	}
	if out.records, err = json.Marshal(res); err != nil {
		return nil, err
	}
	if out.batch, err = json.Marshal(batch); err != nil {
		return nil, err
	}
	if out.state, err = s.encode(); err != nil {
		return nil, err
	}
	out.scores = sc.encode()
	return out, nil
}

// machineMap returns the first question's machine labels by item id.
func machineMap(ms []handoff.MachineLabel) map[string]handoff.MachineLabel {
	m := make(map[string]handoff.MachineLabel, len(ms))
	for _, x := range ms {
		if x.Question == "" {
			m[x.Item] = x
		}
	}
	return m
}

// builtInput is a verdict input with the counts a round reports.
type builtInput struct {
	in      verdict.Input
	settled int
}

// verdictInput gathers what the verdict needs: the held-out members that
// meet the reference standard (reference class and machine probabilities),
// the labelled ones that do not yet, the archive's confidences (every item
// of the kind without crowd labels or gold, machine-labelled ones
// included), the annotators' leave-one-out figures, the stop set, the
// learning curve on one evaluation set, the audit, the consensus's error on
// gold, and the stored machine labels' model. With reach not nil only the
// items it marks count (a follow-up's: those its parent's answer asks it
// on).
func verdictInput(p *project, cr *consensusResult, s *state, cfg Config, proba func(i int) []float64,
	machine map[string]handoff.MachineLabel, look int, model string, settings []verdict.Setting, reach []bool) (*builtInput, error) {
	K := len(p.cb.Classes)
	held := s.HeldOut
	if held == nil {
		return nil, fmt.Errorf("%w: the rounds' state has no held-out set (it was written by an older loop); run `loop round DIR --force`", ErrNothing)
	}
	std := cfg.Standard
	kind := held.Kind
	in := verdict.Input{Classes: p.cb.Keys(), StopSet: s.StopPreds, Look: look, Run: settings}
	st := &verdict.Standard{Level: std.Level, Cap: std.Cap, Lag: std.Lag, Share: held.Share}
	ref := map[string]int{} // settled members → reference class
	archive := 0
	labelsOn := 0
	labelledItems := 0
	for i, it := range p.items {
		if it.Kind != kind || reach != nil && !reach[i] {
			continue
		}
		if cr.nlabels[i] > 0 {
			labelsOn += int(cr.nlabels[i])
			labelledItems++
		}
		if !held.member(it) {
			if cr.nlabels[i] == 0 && p.gold[i] < 0 {
				archive++
				if pr := proba(i); pr != nil {
					in.Archive = append(in.Archive, slices.Max(pr))
				}
			}
			continue
		}
		st.Members++
		pr := proba(i)
		if pr == nil {
			st.Waiting++ // added since the round scored the archive
			continue
		}
		if cr.nlabels[i] == 0 && p.gold[i] < 0 {
			st.Waiting++
			continue
		}
		if c, ok := s.Cohort[it.ID]; !ok || c > max(1, s.Round-std.Lag) {
			st.Pending++ // labelled too recently to count yet
			continue
		}
		switch {
		case p.gold[i] >= 0:
			st.Met++
			ref[it.ID] = p.gold[i]
			in.Truth = append(in.Truth, p.gold[i])
			in.Proba = append(in.Proba, slices.Clone(pr))
		default:
			row := cr.posterior[i*K : (i+1)*K]
			c := floats.MaxIdx(row)
			if row[c] >= std.Level || int(cr.nlabels[i]) >= std.Cap {
				st.Met++
				ref[it.ID] = c
				in.Truth = append(in.Truth, c)
				in.Proba = append(in.Proba, slices.Clone(pr))
			} else {
				st.Below++
				in.Unsettled = append(in.Unsettled, slices.Clone(pr))
			}
		}
	}
	in.Standard = st
	if labelledItems > 0 {
		in.LabelCap = int(math.Ceil(float64((archive+labelledItems)*labelsOn) / float64(labelledItems)))
	}
	ann, err := annotatorFigures(p, cr)
	if err != nil {
		return nil, err
	}
	in.Annotators = ann
	in.Curve = curvePoints(s, ref)
	in.Audit = auditCounts(p, cr, s, machine)
	if p.hasG {
		g, err := goldCheck(p, cfg)
		if err != nil {
			return nil, err
		}
		in.Gold = g
	}
	if len(machine) > 0 {
		count := map[string]int{}
		rounds := map[string]int{}
		for _, m := range machine {
			count[m.Model]++
			rounds[m.Model] = m.Round
		}
		best := ""
		for name, n := range count {
			if best == "" || n > count[best] || n == count[best] && name < best {
				best = name
			}
		}
		in.Stored = &verdict.StoredLabels{Model: best, Round: rounds[best], Items: len(machine), Latest: model}
	}
	return &builtInput{in: in, settled: len(in.Truth)}, nil
}

// curvePoints scores every stored round's model on one evaluation set: the
// held-out members that meet the reference standard now (ref) and that
// every round scored. A round's point is its labels spent and its error
// there.
func curvePoints(s *state, ref map[string]int) []verdict.CurvePoint {
	if len(s.Curve) == 0 || len(ref) == 0 {
		return nil
	}
	var eval []string
	for id := range ref {
		ok := true
		for _, c := range s.Curve {
			if _, has := c.Pred[id]; !has {
				ok = false
				break
			}
		}
		if ok {
			eval = append(eval, id)
		}
	}
	if len(eval) == 0 {
		return nil
	}
	out := make([]verdict.CurvePoint, 0, len(s.Curve))
	for _, c := range s.Curve {
		wrong := 0
		for _, id := range eval {
			if c.Pred[id] != ref[id] {
				wrong++
			}
		}
		if c.Labels > 0 {
			out = append(out, verdict.CurvePoint{Labels: c.Labels, Error: float64(wrong) / float64(len(eval))})
		}
	}
	return out
}

// annotatorFigures returns each annotator's Cohen's kappa against the
// leave-one-out majority (crowd.Agree) and leave-one-out agreement: over
// the items they labelled that at least two other annotators labelled too
// (after cleaning; each annotator's first label on an item), the share of
// their labels in the plurality class of the others' labels, a tie among m
// classes counting 1/m when theirs is one of them. Annotators with fewer
// than 10 such items are left out.
func annotatorFigures(p *project, cr *consensusResult) ([]verdict.Annotator, error) {
	l := cr.kept
	if l == nil || l.Len() == 0 {
		return nil, nil
	}
	K := len(p.cb.Classes)
	type key struct{ item, ann int32 }
	first := map[key]uint8{}
	var order []key
	for j := range l.Item {
		k := key{l.Item[j], l.Annotator[j]}
		if _, ok := first[k]; !ok {
			first[k] = l.Class[j]
			order = append(order, k)
		}
	}
	counts := make(map[int32][]int)
	for _, k := range order {
		c := counts[k.item]
		if c == nil {
			c = make([]int, K)
			counts[k.item] = c
		}
		c[first[k]]++
	}
	agree := map[int32]float64{}
	items := map[int32]int{}
	for _, k := range order {
		c := counts[k.item]
		mine := int(first[k])
		others, best := 0, 0
		for cl, v := range c {
			if cl == mine {
				v--
			}
			others += v
			best = max(best, v)
		}
		if others < 2 {
			continue
		}
		ties, hit := 0, false
		for cl, v := range c {
			if cl == mine {
				v--
			}
			if v == best {
				ties++
				if cl == mine {
					hit = true
				}
			}
		}
		items[k.ann]++
		if hit {
			agree[k.ann] += 1 / float64(ties)
		}
	}
	kappa := map[int]float64{}
	if ag, err := crowd.Agree(l, crowd.AgreementOptions{Reps: -1}); err == nil {
		for _, a := range ag.LeaveOneOut {
			if a.Kappa.Defined {
				kappa[a.Annotator] = a.Kappa.Value
			}
		}
	}
	var out []verdict.Annotator
	for a, n := range items {
		k, ok := kappa[int(a)]
		if n < 10 || !ok {
			continue
		}
		out = append(out, verdict.Annotator{ID: p.anns[a], Kappa: k, Agreement: agree[a] / float64(n), Items: n})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out, nil
}

// goldCheck measures the consensus's own error on gold items: gold is
// split into two halves by a seeded hash, and the consensus is computed
// again with each half's answers hidden (the other half still screens
// annotators and anchors the method); a hidden gold item counts when its
// consensus then meets the reference standard, and errs when its class
// differs from the gold answer.
func goldCheck(p *project, cfg Config) (*verdict.GoldCounts, error) {
	K := len(p.cb.Classes)
	g := &verdict.GoldCounts{}
	for half := range 2 {
		q := *p
		q.gold = slices.Clone(p.gold)
		hidden := 0
		for i, c := range p.gold {
			if c >= 0 && int(heldOutHash(cfg.Seed^0x90dd, p.items[i].ID)*2) == half {
				q.gold[i] = -1
				hidden++
			}
		}
		if hidden == 0 {
			continue
		}
		q.hasG = slices.ContainsFunc(q.gold, func(c int) bool { return c >= 0 })
		cr, err := consensus(&q, cfg.Consensus)
		if errors.Is(err, ErrNothing) {
			continue
		}
		if err != nil {
			return nil, fmt.Errorf("consensus with half the gold hidden: %w", err)
		}
		for i, c := range p.gold {
			if c < 0 || q.gold[i] >= 0 || cr.nlabels[i] == 0 {
				continue
			}
			row := cr.posterior[i*K : (i+1)*K]
			b := floats.MaxIdx(row)
			if row[b] < cfg.Standard.Level && int(cr.nlabels[i]) < cfg.Standard.Cap {
				continue
			}
			g.Items++
			if b != c {
				g.Errors++
			}
		}
	}
	if g.Items == 0 {
		return nil, nil
	}
	return g, nil
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
		if keys[floats.MaxIdx(cr.posterior[i*K:(i+1)*K])] != m.Class {
			a.Errors++
		}
	}
	if a.Items == 0 {
		return nil
	}
	return a
}

// buildPool lays the items out for the selector: other kinds and gold are
// Excluded; held-out members are HeldOutWaiting without labels, HeldOutBelow
// when labelled below the reference standard and HeldOut otherwise; other
// labelled items are Labelled (with their consensus and out-of-fold
// scores); machine-labelled items are Machine; the rest Unlabelled.
func buildPool(p *project, cr *consensusResult, sc *scores, kind handoff.Kind, held *heldOutSet,
	machine map[string]handoff.MachineLabel, meets func(i int) bool) selector.Pool {
	K := len(p.cb.Classes)
	n := len(p.items)
	pool := selector.Pool{
		State:     make([]selector.State, n),
		Proba:     make([][]float64, n),
		Consensus: make([][]float64, n),
		Labels:    make([]int, n),
	}
	for i, it := range p.items {
		pool.Labels[i] = int(cr.nlabels[i])
		row := sc.row(i)
		switch {
		case it.Kind != kind || p.gold[i] >= 0:
			pool.State[i] = selector.Excluded
		case held.member(it):
			switch {
			case cr.nlabels[i] == 0:
				pool.State[i] = selector.HeldOutWaiting
			case !meets(i):
				pool.State[i] = selector.HeldOutBelow
				pool.Proba[i] = row
			default:
				pool.State[i] = selector.HeldOut
			}
		case cr.nlabels[i] > 0:
			pool.State[i] = selector.Labelled
			pool.Consensus[i] = cr.posterior[i*K : (i+1)*K]
			pool.Proba[i] = row
		case machine[it.ID].Item != "":
			pool.State[i] = selector.Machine
		default:
			pool.State[i] = selector.Unlabelled
			pool.Proba[i] = row
		}
		if pool.Proba[i] == nil && (pool.State[i] == selector.Unlabelled || pool.State[i] == selector.Labelled) {
			// Added since the scores were made: not a candidate until the
			// next round scores it.
			pool.State[i] = selector.Excluded
		}
	}
	return pool
}

// pickBatch plans the batch from the settings and picks it, seeded by the
// settings' seed and the round's number.
func pickBatch(p *project, pool selector.Pool, cfg Config, roundN int, machine map[string]handoff.MachineLabel) ([]BatchItem, error) {
	plan, err := selector.PlanShares(cfg.Batch, cfg.Shares)
	if err != nil {
		return nil, err
	}
	// Held-out work: reference requests first, then new held-out items,
	// within the slots of both.
	below := 0
	for _, st := range pool.State {
		if st == selector.HeldOutBelow {
			below++
		}
	}
	if room := plan.Standard + plan.HeldOut; below > plan.Standard {
		plan.Standard = min(below, room)
		plan.HeldOut = room - plan.Standard
	}
	plan.Strategy, plan.Beta, plan.Diversity, plan.Balanced = cfg.Strategy, cfg.Beta, cfg.Diversity, cfg.Balanced
	plan.SplitBelow = cfg.Consensus.Uncertain
	plan.MaxLabels = cfg.Standard.Cap
	plan.Seed = cfg.Seed + 1000003*uint64(roundN)
	return picksToBatch(p, pool, plan, machine)
}

func picksToBatch(p *project, pool selector.Pool, plan selector.Plan, machine map[string]handoff.MachineLabel) ([]BatchItem, error) {
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
			b.Machine = keys[floats.MaxIdx(pool.Proba[pk.Item])]
			b.Crowd = keys[floats.MaxIdx(pool.Consensus[pk.Item])]
		case selector.ReasonSplit:
			b.Crowd = keys[floats.MaxIdx(pool.Consensus[pk.Item])]
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
	return decodeResult(rs[len(rs)-1])
}

func decodeResult(n store.Numbered) (*Result, error) {
	var r Result
	if err := json.Unmarshal(n.Data, &r); err != nil {
		return nil, fmt.Errorf("reading round %d: %w", n.N, err)
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
