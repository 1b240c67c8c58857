package round

import (
	"encoding/json"
	"errors"
	"fmt"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/crowd"
	"handoff/learner"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

// One machine per question. In a question tree every question gets a
// machine of its own, trained on the items with a consensus for that
// question, all of them on one featurisation of the archive (the first
// question's: the feature extraction is fitted on its training items, which
// every asked follow-up's items are drawn from). A model per reachable path
// was the other choice; one per question keeps each follow-up's machine
// trained on every item that reached it, whatever path led there, keeps
// each verdict about one question that a person answers, and lets a
// question added later get a machine without retraining the others. The
// first question's machine is the round's (Result.Model, the model store);
// a follow-up's model and scores are kept as project state ("model/KEY",
// "scores/KEY") in the same commit, and its verdict is computed with the same
// code on cb.Sub(q), on the held-out members that reach it. Each question's
// bound holds at the stated confidence for that question (α spent across
// looks as for the first); a team wanting it for all Q questions at once
// sets confidence 1 − α/Q (Bonferroni). A follow-up's verdict has no stop
// rule, learning curve or audit (those are the first question's), and no
// gold (gold answers the first question).

// QuestionResult is one question's part of a round in a question tree.
type QuestionResult struct {
	Key    string   `json:"key"`
	Parent string   `json:"parent,omitempty"`
	When   []string `json:"when,omitempty"`
	// Alpha is the crowd's Krippendorff's alpha on the question's cleaned
	// labels (AlphaMetric: ordinal for an ordinal question, nominal
	// otherwise), nil when it cannot be estimated.
	Alpha       *float64 `json:"alpha,omitempty"`
	AlphaMetric string   `json:"alpha_metric,omitempty"`
	// Consensus is the question's consensus report (nil without labels).
	Consensus *ConsensusReport `json:"consensus,omitempty"`
	// Train and Model are its machine (nil and "" when none could be
	// trained yet).
	Train *TrainReport `json:"train,omitempty"`
	Model string       `json:"model,omitempty"`
	// Verdict is nil while the question cannot be judged; Why then says
	// why ("no verdict yet: …").
	Verdict *verdict.Report `json:"verdict,omitempty"`
	Why     string          `json:"why,omitempty"`
	// HeldOut are the held-out members reaching the question whose
	// reference answer meets the standard (what the verdict counts);
	// HeldOutAsked the held-out members reaching it.
	HeldOut      int `json:"held_out"`
	HeldOutAsked int `json:"held_out_asked"`
}

// Decision returns "GO", "NOT YET", or "" when the question has no verdict.
func (q *QuestionResult) Decision() string {
	switch {
	case q.Verdict == nil:
		return ""
	case q.Verdict.Decision.Go:
		return "GO"
	}
	return "NOT YET"
}

// minQuestionRows is the fewest items with a consensus for a follow-up,
// outside the held-out set, its machine is trained on: the fewest on which a
// temperature is fitted (train).
const minQuestionRows = 10

// Project-state names of a follow-up's machine and scores.
func questionModelState(key string) string  { return "model/" + key }
func questionScoresState(key string) string { return "scores/" + key }

// answers is one question's answer per item position in a round: its
// consensus class (-1 where it has none), whether people answered it
// (labels or gold), and the machine's class (-1 unscored).
type answers struct {
	cons    []int
	crowd   []bool
	machine []int
}

// reaches returns, per item position, whether follow-up q is asked: by the
// consensus (asked, the items its consensus is computed on — the parent's
// consensus class is in When.In, as QuestionConsensus does) and by the
// parent's answer (reach: the crowd's consensus where people answered the
// parent, the machine's class elsewhere, and the parent reached in turn).
// Both are nil for an unconditional follow-up (every item).
func reaches(cb handoff.Codebook, q int, ans []*answers, reach [][]bool, n int) (asked, rch []bool) {
	p := cb.Parent(q)
	if p < 0 {
		return nil, nil
	}
	in := map[int]bool{}
	sub := cb.Sub(p)
	for _, c := range cb.All()[q].When.In {
		if k, ok := sub.Index(c); ok {
			in[k] = true
		}
	}
	a := ans[p]
	asked, rch = make([]bool, n), make([]bool, n)
	for i := range n {
		asked[i] = a.cons[i] >= 0 && in[a.cons[i]]
		if reach[p] != nil && !reach[p][i] {
			continue
		}
		if a.crowd[i] {
			rch[i] = asked[i]
		} else {
			rch[i] = a.machine[i] >= 0 && in[a.machine[i]]
		}
	}
	return asked, rch
}

// treeRun is the follow-ups' part of a round in memory.
type treeRun struct {
	results []QuestionResult // every question, first first (cb.All() order)
	states  map[string][]byte
	scores  []*scores // per question (cb.All() order); nil without a machine
	ans     []*answers
	reach   [][]bool
	// projects and label counts per follow-up, for the asks of a question
	// added later.
	qp    []*project
	cr    []*consensusResult
	asked [][]bool
}

// runFollowUps computes every follow-up's consensus (in QuestionOrder, each
// conditional on its parent's), trains its machine on the first question's
// features, scores the archive and computes its verdict.
func runFollowUps(in *roundInput, first *consensusResult, firstRes QuestionResult, t *trained, sc *scores, s *state,
	cfg Config, look int, settings []verdict.Setting) (*treeRun, error) {
	sn := in.sn
	cb := sn.Codebook
	all := cb.All()
	n := len(sn.Items)
	kind := s.HeldOut.Kind
	tr := &treeRun{results: make([]QuestionResult, len(all)), states: map[string][]byte{}, scores: make([]*scores, len(all)),
		ans: make([]*answers, len(all)), reach: make([][]bool, len(all)), qp: make([]*project, len(all)), cr: make([]*consensusResult, len(all)), asked: make([][]bool, len(all))}
	tr.results[0] = firstRes
	tr.scores[0] = sc
	tr.ans[0] = answersOf(in.p, first, sc, n)
	for _, q := range QuestionOrder(cb) {
		if q == 0 {
			continue
		}
		x := all[q]
		res := QuestionResult{Key: x.Key}
		if p := cb.Parent(q); p >= 0 {
			res.Parent, res.When = all[p].Key, x.When.In
		}
		asked, reach := reaches(cb, q, tr.ans, tr.reach, n)
		tr.reach[q], tr.asked[q] = reach, asked
		none := &answers{cons: make([]int, n), crowd: make([]bool, n), machine: make([]int, n)}
		for i := range n {
			none.cons[i], none.machine[i] = -1, -1
		}
		tr.ans[q] = none
		pq, cq, stored, err := followUpConsensus(sn, q, asked, cfg.Consensus)
		if errors.Is(err, ErrNothing) {
			if pq, err = questionProject(sn, q, asked); err != nil {
				return nil, err
			}
			tr.qp[q] = pq
			res.Why = fmt.Sprintf("no verdict yet: question %q has no labels on the items where it is asked", x.Key)
			tr.results[q] = res
			continue
		}
		if err != nil {
			return nil, err
		}
		tr.qp[q], tr.cr[q] = pq, cq
		res.Consensus = stored.Report
		res.Alpha, res.AlphaMetric = alphaOf(cq, x.Scale == handoff.Ordinal)
		if tr.states[questionState(x.Key)], err = json.Marshal(stored); err != nil {
			return nil, err
		}
		K := len(pq.cb.Classes)
		var rows []int
		for i, it := range pq.items {
			if it.Kind == kind && cq.nlabels[i] > 0 && !s.HeldOut.member(it) && (asked == nil || asked[i]) {
				rows = append(rows, i)
			}
		}
		if len(rows) < minQuestionRows {
			res.Why = fmt.Sprintf("no verdict yet: %d items outside the held-out set have a consensus for %q; its machine needs at least %d", len(rows), x.Key, minQuestionRows)
			tr.ans[q] = answersOf(pq, cq, nil, n)
			tr.results[q] = res
			continue
		}
		tc := cfg.Train
		tc.Kind = kind
		tq, err := trainOn(pq, cq.posterior, rows, tc, t)
		if err != nil {
			res.Why = "no verdict yet: " + err.Error()
			tr.ans[q] = answersOf(pq, cq, nil, n)
			tr.results[q] = res
			continue
		}
		tq.m.Name = fmt.Sprintf("r%d-%s-%s", s.Round, x.Key, tq.m.Fingerprint[:8])
		tq.rep.Version = tq.m.Name
		res.Train, res.Model = tq.rep, tq.m.Name
		proba := make([]float64, n*K)
		tq.m.ProbaInto(proba, tq.all)
		sq := &scores{Round: s.Round, Model: tq.m.Name, K: K, rows: make([][]float64, n)}
		for i, it := range pq.items {
			if it.Kind == kind {
				sq.rows[i] = proba[i*K : (i+1)*K]
			}
		}
		for j, i := range tq.rows {
			sq.rows[i] = tq.oof[j*K : (j+1)*K]
		}
		tr.scores[q] = sq
		tr.ans[q] = answersOf(pq, cq, sq, n)
		tr.states[questionScoresState(x.Key)] = sq.encode()
		if tr.states[questionModelState(x.Key)], err = learner.MarshalMachine(tq.m); err != nil {
			return nil, err
		}
		// The verdict on the held-out members that reach the question. The
		// stop rule, the learning curve and the audit are the first
		// question's: a follow-up's verdict has none of them.
		fs := *s
		fs.StopPreds, fs.Curve, fs.Audit = nil, nil, nil
		vin, err := verdictInput(pq, cq, &fs, cfg, func(i int) []float64 { return proba[i*K : (i+1)*K] },
			machineOf(in.machine, x.Key), look, tq.m.Name, settings, reach)
		if err != nil {
			return nil, err
		}
		res.HeldOut, res.HeldOutAsked = vin.settled, vin.in.Standard.Members
		if vin.settled == 0 {
			res.Why = fmt.Sprintf("no verdict yet: none of the %d held-out items that reach %q has a reference answer yet (%d wait for labels, %d below the standard, %d labelled too recently)",
				vin.in.Standard.Members, x.Key, vin.in.Standard.Waiting, vin.in.Standard.Below, vin.in.Standard.Pending)
			tr.results[q] = res
			continue
		}
		rep, err := verdict.Compute(vin.in, cfg.Verdict)
		if err != nil {
			return nil, fmt.Errorf("verdict of question %q: %w", x.Key, err)
		}
		res.Verdict = rep
		tr.results[q] = res
	}
	return tr, nil
}

// alphaOf returns Krippendorff's alpha of a consensus's cleaned labels,
// ordinal or nominal, without intervals; nil when it cannot be estimated.
func alphaOf(cr *consensusResult, ordinal bool) (*float64, string) {
	metric := crowd.MetricNominal
	if ordinal {
		metric = crowd.MetricOrdinal
	}
	if cr.kept == nil || cr.kept.Len() == 0 {
		return nil, string(metric)
	}
	a, err := crowd.Agree(cr.kept, crowd.AgreementOptions{Reps: -1})
	if err != nil {
		return nil, string(metric)
	}
	e, ok := a.Alpha[metric]
	if !ok || !e.Defined {
		return nil, string(metric)
	}
	v := e.Value
	return &v, string(metric)
}

// Summaries returns every question of a tree round as the verdict report
// shows them (nil for a one-question round).
func (r *Result) Summaries() []verdict.QuestionSummary {
	var out []verdict.QuestionSummary
	for _, q := range r.Questions {
		s := verdict.QuestionSummary{Key: q.Key, Parent: q.Parent, When: q.When, Alpha: q.Alpha, AlphaMetric: q.AlphaMetric,
			Machine: q.Model, Verdict: q.Verdict, Why: q.Why}
		if c := q.Consensus; c != nil {
			s.Items, s.Uncertain = c.Items-c.NoLabels, c.Uncertain
		}
		if q.Train != nil {
			s.CV = q.Train.CV.Accuracy
		}
		out = append(out, s)
	}
	return out
}

// answersOf lays out a question's answers per item position: the
// consensus class of every item in cr.cs (items without labels too, as the
// stored first-question consensus lists them), whether people answered
// (labels or gold), and the machine's class from sc (nil: none).
func answersOf(p *project, cr *consensusResult, sc *scores, n int) *answers {
	a := &answers{cons: make([]int, n), crowd: make([]bool, n), machine: make([]int, n)}
	for i := range n {
		a.cons[i], a.machine[i] = -1, -1
		if r := sc.row(i); r != nil {
			a.machine[i] = floats.MaxIdx(r)
		}
	}
	for i, c := range cr.cs {
		if k, ok := p.cb.Index(c.Class); ok && i < n {
			a.cons[i] = k
		}
		a.crowd[i] = i < n && (cr.nlabels[i] > 0 || p.gold[i] >= 0)
	}
	return a
}

// machineOf returns the machine labels of one question (key; "" the
// first) by item id. Machine labels written before question trees have no
// question: they are the first question's.
func machineOf(ms []handoff.MachineLabel, key string) map[string]handoff.MachineLabel {
	m := map[string]handoff.MachineLabel{}
	for _, x := range ms {
		if x.Question == key {
			m[x.Item] = x
		}
	}
	return m
}

// treeOf returns the selector's tree of the codebook's questions in
// QuestionOrder, and that order.
func treeOf(cb handoff.Codebook) ([]selector.TreeQuestion, []int) {
	order := QuestionOrder(cb)
	at := make(map[int]int, len(order))
	for j, q := range order {
		at[q] = j
	}
	all := cb.All()
	tree := make([]selector.TreeQuestion, len(order))
	for j, q := range order {
		x := all[q]
		tq := selector.TreeQuestion{Parent: -1, K: len(x.Classes)}
		if p := cb.Parent(q); p >= 0 {
			tq.Parent = at[p]
			sub := cb.Sub(p)
			for _, c := range x.When.In {
				if k, ok := sub.Index(c); ok {
					tq.In = append(tq.In, k)
				}
			}
		}
		tree[j] = tq
	}
	return tree, order
}

// treeUncertainty returns selector.TreeUncertainty per item position for the
// items the pool offers as model-unsure candidates, from each question's
// scores (nil for a question without a machine yet).
func treeUncertainty(cb handoff.Codebook, pool selector.Pool, sc []*scores) ([]float64, error) {
	tree, order := treeOf(cb)
	u := make([]float64, len(pool.State))
	rows := make([][]float64, len(order))
	for i, st := range pool.State {
		if st != selector.Unlabelled || pool.Proba[i] == nil {
			continue
		}
		for j, q := range order {
			rows[j] = sc[q].row(i)
		}
		rows[0] = pool.Proba[i]
		v, err := selector.TreeUncertainty(tree, rows)
		if err != nil {
			return nil, fmt.Errorf("item %d: %w", i, err)
		}
		u[i] = v
	}
	return u, nil
}

// ReasonQuestion is the reason of a batch item asking only some questions
// (BatchItem.Questions) of an item people answered the others on: a
// question added later, or one its parent's consensus now calls for.
const ReasonQuestion = "new-question"

// questionAsks returns the items to ask follow-up questions on, each
// entry naming the questions (BatchItem.Questions): first the held-out
// members whose consensus for a follow-up is below the reference standard
// (reason "reference", in a seeded random order), then the items people
// labelled whose parent consensus calls for a follow-up that has no label
// on them yet (ReasonQuestion: a question added later, or one the parent's
// consensus now asks), held-out members first, the others in a seeded
// random order.
func (tr *treeRun) questionAsks(cb handoff.Codebook, p *project, first *consensusResult, kind handoff.Kind, held *heldOutSet, std StandardConfig, seed uint64) []BatchItem {
	all := cb.All()
	n := len(p.items)
	need := make([][]string, n)
	below := make([][]string, n)
	for _, q := range QuestionOrder(cb) {
		if q == 0 || tr.qp[q] == nil {
			continue
		}
		labelled := make([]int, n)
		for _, i := range tr.qp[q].labels.Item {
			labelled[i]++
		}
		K := len(all[q].Classes)
		for i, it := range p.items {
			if it.Kind != kind || first.nlabels[i] == 0 && p.gold[i] < 0 {
				continue
			}
			if a := tr.asked[q]; a != nil && !a[i] {
				continue
			}
			if pq := cb.Parent(q); pq > 0 && !tr.ans[pq].crowd[i] {
				continue // its parent is a follow-up not answered yet: asked with it
			}
			switch cr := tr.cr[q]; {
			case labelled[i] == 0:
				need[i] = append(need[i], all[q].Key)
			case cr != nil && held.member(it) && cr.nlabels[i] > 0 && int(cr.nlabels[i]) < std.Cap:
				row := cr.posterior[i*K : (i+1)*K]
				if row[floats.MaxIdx(row)] < std.Level {
					below[i] = append(below[i], all[q].Key)
				}
			}
		}
	}
	var ref, heldOut, rest []int
	for i := range n {
		switch {
		case len(below[i]) > 0:
			ref = append(ref, i)
		case len(need[i]) == 0:
		case held.member(p.items[i]):
			heldOut = append(heldOut, i)
		default:
			rest = append(rest, i)
		}
	}
	r := rand.New(rand.NewPCG(seed, 0x9e57))
	for _, c := range [][]int{ref, heldOut, rest} {
		r.Shuffle(len(c), func(a, b int) { c[a], c[b] = c[b], c[a] })
	}
	var out []BatchItem
	for _, i := range slices.Concat(ref, heldOut, rest) {
		it := p.items[i]
		b := BatchItem{Item: it.ID, Reason: ReasonQuestion, Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent, Questions: need[i]}
		if len(below[i]) > 0 {
			b.Reason, b.Questions = string(selector.ReasonStandard), append(below[i], need[i]...)
		}
		out = append(out, b)
	}
	return out
}

// withAsks puts question asks into a batch of size size: into its empty
// slots and in place of its last model-unsure picks, at most half the batch
// unless the rest of it is empty.
func withAsks(batch, asks []BatchItem, size int) []BatchItem {
	if len(asks) == 0 {
		return batch
	}
	unsure := 0
	for _, b := range batch {
		if b.Reason == string(selector.ReasonUnsure) {
			unsure++
		}
	}
	empty := max(0, size-len(batch))
	want := min(len(asks), empty+unsure, max(size/2, empty))
	drop := max(0, want-empty)
	out := make([]BatchItem, 0, len(batch)+want)
	dropped := make([]bool, len(batch))
	for j := len(batch) - 1; j >= 0 && drop > 0; j-- {
		if batch[j].Reason == string(selector.ReasonUnsure) {
			dropped[j] = true
			drop--
		}
	}
	inBatch := map[string]bool{}
	for j, b := range batch {
		if !dropped[j] {
			out = append(out, b)
			inBatch[b.Item] = true
		}
	}
	k := 0
	for _, a := range asks {
		if k == want {
			break
		}
		if inBatch[a.Item] {
			continue
		}
		out = append(out, a)
		k++
	}
	return out
}

// loadQuestionScores reads every follow-up's stored scores of round r (nil
// entries for questions without a machine in that round).
func loadQuestionScores(sn *store.Snapshot, first *scores) ([]*scores, error) {
	all := sn.Codebook.All()
	out := make([]*scores, len(all))
	out[0] = first
	for q := 1; q < len(all); q++ {
		b := sn.State[questionScoresState(all[q].Key)]
		if b == nil {
			continue
		}
		sc, err := decodeScores(b)
		if err != nil {
			return nil, fmt.Errorf("question %q: %w", all[q].Key, err)
		}
		if sc != nil && first != nil && sc.Round == first.Round {
			out[q] = sc
		}
	}
	return out, nil
}

// autolabelFollowUps returns the machine labels of every follow-up with GO
// (or every follow-up with a machine, with cfg.Force), in QuestionOrder: on
// the items of the round's kind without labels of the question whose
// parent answer calls for it — the crowd's consensus where people answered
// the parent, the parent's machine label otherwise (written now, in
// written, or stored before) — at the question's own threshold (or
// cfg.Threshold).
func (c *current) autolabelFollowUps(cfg AutolabelConfig, written []handoff.MachineLabel) ([]handoff.MachineLabel, []AutolabelQuestion, error) {
	sn := c.sn
	cb := sn.Codebook
	all := cb.All()
	n := len(c.p.items)
	qsc, err := loadQuestionScores(sn, c.sc)
	if err != nil {
		return nil, nil, err
	}
	results := map[string]QuestionResult{}
	for _, r := range c.r.Questions {
		results[r.Key] = r
	}
	// answer[q][i]: question q's answer on item i ("" none).
	answer := make([][]string, len(all))
	fromCrowd := func(q int, cs []handoff.Consensus) {
		answer[q] = make([]string, n)
		for _, x := range cs {
			if i, ok := c.p.index[x.Item]; ok && (x.Labels > 0 || q == 0 && c.p.gold[i] >= 0) {
				answer[q][i] = x.Class
			}
		}
	}
	fromMachine := func(q int, ms []handoff.MachineLabel) {
		for _, m := range ms {
			if i, ok := c.p.index[m.Item]; ok && answer[q][i] == "" && m.Question == keyOf(cb, q) {
				answer[q][i] = m.Class
			}
		}
	}
	fromCrowd(0, sn.Consensus)
	fromMachine(0, written)
	fromMachine(0, sn.Machine)
	var out []handoff.MachineLabel
	var reps []AutolabelQuestion
	kind := c.r.Train.Kind
	for _, q := range QuestionOrder(cb) {
		if q == 0 {
			continue
		}
		x := all[q]
		var cs []handoff.Consensus
		if b := sn.State[questionState(x.Key)]; b != nil {
			var sq storedQuestion
			if err := json.Unmarshal(b, &sq); err != nil {
				return nil, nil, fmt.Errorf("reading the consensus of question %q: %w", x.Key, err)
			}
			cs = sq.Consensus
		}
		fromCrowd(q, cs)
		r := results[x.Key]
		ar := AutolabelQuestion{Key: x.Key, Go: r.Verdict != nil && r.Verdict.Decision.Go}
		var mine []handoff.MachineLabel
		switch {
		case qsc[q] == nil:
			ar.Why = "no machine yet: left for people"
		case !ar.Go && !cfg.Force:
			ar.Why = "NOT YET: left for people"
			if r.Verdict == nil {
				ar.Why = r.Why + ": left for people"
			}
		default:
			th := cfg.Threshold
			if th <= 0 {
				if r.Verdict == nil || !r.Verdict.Threshold.Found {
					ar.Why = "no threshold whose error bound is below max-error: left for people (give one with --threshold)"
					break
				}
				th, ar.Bound = r.Verdict.Threshold.Threshold, r.Verdict.Threshold.Upper
			}
			ar.Threshold = th
			labelled := make([]bool, n)
			t := sn.Labels.ForQuestion(cb, q)
			for _, it := range t.Item {
				if i, ok := c.p.index[t.ItemIDs[it]]; ok {
					labelled[i] = true
				}
			}
			in := map[string]bool{}
			p := cb.Parent(q)
			if p >= 0 {
				for _, k := range x.When.In {
					in[k] = true
				}
			}
			keys := cb.Sub(q).Keys()
			for i, it := range c.p.items {
				if it.Kind != kind || labelled[i] || p >= 0 && !in[answer[p][i]] {
					continue
				}
				row := qsc[q].row(i)
				if row == nil {
					continue
				}
				ar.Scored++
				if b := floats.MaxIdx(row); row[b] >= th {
					mine = append(mine, handoff.MachineLabel{Item: it.ID, Question: x.Key, Class: keys[b], Confidence: row[b], Proba: slices.Clone(row), Model: qsc[q].Model, Round: c.r.Round})
				}
			}
		}
		ar.Labelled = len(mine)
		fromMachine(q, mine)
		fromMachine(q, sn.Machine)
		out = append(out, mine...)
		reps = append(reps, ar)
	}
	return out, reps, nil
}

// keyOf is the key machine labels carry for question q: "" for the first.
func keyOf(cb handoff.Codebook, q int) string {
	if q == 0 {
		return ""
	}
	return cb.All()[q].Key
}
