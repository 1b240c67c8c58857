package round

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/features"
	"handoff/learner"
	"handoff/store"
)

// TrainConfig says how the machine is trained.
type TrainConfig struct {
	// Learner is logistic, bayes or forest; "" picks logistic for text and
	// forest for images.
	Learner string `json:"learner"`
	// Kind is text or image: which items to train on; "" picks the kind
	// most items of the project have.
	Kind handoff.Kind `json:"kind"`
	// Lambda is the logistic regression's L2 penalty (λ = 1/C); 0 means 0.1.
	Lambda float64 `json:"lambda"`
	// Folds is the number of grouped cross-validation folds (items of one
	// parent stay in one fold); 0 means 5.
	Folds int `json:"folds"`
	// Trees is the forest's number of trees; 0 means 200.
	Trees int `json:"trees,omitempty"`
	// Text and Image configure the features; zero values take the
	// defaults (word 1–2-grams, TF-IDF, min_df 2; 64×64 image features).
	Text  *features.TextConfig  `json:"text,omitempty"`
	Image *features.ImageConfig `json:"image,omitempty"`
	Seed  uint64                `json:"seed"`
}

// CVMetrics are k-fold cross-validated figures, machine against consensus.
type CVMetrics struct {
	Folds     int     `json:"folds"`
	Grouped   bool    `json:"grouped,omitempty"` // some items have a parent: folds keep each parent's items together
	Rows      int     `json:"rows"`
	Accuracy  float64 `json:"accuracy"`
	MacroF1   float64 `json:"macro_f1"`
	ECEBefore float64 `json:"ece_before"` // out-of-fold, before temperature scaling
	ECEAfter  float64 `json:"ece_after"`  // out-of-fold, after temperature scaling
}

// TrainReport says what was trained and how well it did.
type TrainReport struct {
	Version     string       `json:"version"`
	Learner     string       `json:"learner"`
	Kind        handoff.Kind `json:"kind"`
	Rows        int          `json:"rows"`    // training items
	Columns     int          `json:"columns"` // features
	Classes     []string     `json:"classes"`
	Missing     []string     `json:"missing,omitempty"` // classes with no training example
	Temperature float64      `json:"temperature"`
	CV          CVMetrics    `json:"cv"`
	Fingerprint string       `json:"fingerprint"`
	Skipped     int          `json:"skipped,omitempty"` // labelled items of another kind
}

// trained is a machine with its out-of-fold probabilities on its training
// rows (for conflict picks) and its report.
type trained struct {
	m      *learner.Machine
	rep    *TrainReport
	rows   []int     // item positions trained on
	oof    []float64 // len(rows)×K out-of-fold calibrated probabilities
	design features.Matrix
	all    features.Matrix // feature rows of every item of the kind (nil rows for other kinds), for selection
	fit    learner.Learner // the learner, for a query-by-committee
	sub    [][]float64     // training targets over the present classes
}

// Train fits the machine on the stored consensus of every labelled item that
// is not held out, stores the model and returns its report.
func Train(st *store.Store, cfg TrainConfig, source string) (*TrainReport, error) {
	p, sn, post, nl, err := withConsensus(st)
	if err != nil {
		return nil, err
	}
	s, err := decodeState(sn.State[stateName])
	if err != nil {
		return nil, err
	}
	var rows []int
	for i, it := range p.items {
		if (nl[i] > 0 || p.gold[i] >= 0) && !s.HeldOut.member(it) {
			rows = append(rows, i)
		}
	}
	t, err := train(p, post, rows, cfg)
	if err != nil {
		return nil, err
	}
	t.m.Name = fmt.Sprintf("t%d-%s", s.Round, t.m.Fingerprint[:8])
	t.rep.Version = t.m.Name
	b, err := learner.MarshalMachine(t.m)
	if err != nil {
		return nil, err
	}
	if err := st.PutModel(t.m.Name, b, source); err != nil {
		return nil, err
	}
	return t.rep, nil
}

// posteriorsOf lays the stored consensus out per item position.
func posteriorsOf(p *project, cs []handoff.Consensus) ([]float64, []int) {
	K := len(p.cb.Classes)
	post := make([]float64, len(p.items)*K)
	nl := make([]int, len(p.items))
	for _, c := range cs {
		i, ok := p.index[c.Item]
		if !ok || len(c.Posterior) != K {
			continue
		}
		copy(post[i*K:], c.Posterior)
		nl[i] = c.Labels
	}
	return post, nl
}

func setOf(ids []string) map[string]bool {
	m := make(map[string]bool, len(ids))
	for _, id := range ids {
		m[id] = true
	}
	return m
}

// projectKind is the kind most items have (text on a tie).
func projectKind(p *project) handoff.Kind {
	n := 0
	for _, it := range p.items {
		if it.Kind == handoff.KindImage {
			n++
		}
	}
	if 2*n > len(p.items) {
		return handoff.KindImage
	}
	return handoff.KindText
}

// featurise fits the feature extraction on the training rows and returns it
// with the feature rows of every item of the kind: all[i] is row i of the
// returned matrix for item position i (other kinds get empty rows).
func featurise(p *project, kind handoff.Kind, rows []int, cfg TrainConfig, m *learner.Machine) (features.Matrix, error) {
	switch kind {
	case handoff.KindText:
		tc := features.DefaultTextConfig()
		tc.MinDF = 2
		if cfg.Text != nil {
			tc = *cfg.Text
		}
		texts := make([]string, len(rows))
		for j, i := range rows {
			texts[j] = p.items[i].Text
		}
		v, err := tc.Fit(texts)
		if err != nil {
			return nil, fmt.Errorf("text features: %w", err)
		}
		m.Text = v
		all := make([]string, len(p.items))
		for i, it := range p.items {
			if it.Kind == handoff.KindText {
				all[i] = it.Text
			}
		}
		return v.Transform(all), nil
	case handoff.KindImage:
		ic := features.DefaultImageConfig()
		if cfg.Image != nil {
			ic = *cfg.Image
		}
		var paths []string
		var pos []int
		for i, it := range p.items {
			if it.Kind == handoff.KindImage {
				paths = append(paths, it.Path)
				pos = append(pos, i)
			}
		}
		x, err := ic.TransformFiles(paths)
		if err != nil {
			return nil, fmt.Errorf("image features: %w", err)
		}
		// Fit the scaler on the training rows only.
		at := make(map[int]int, len(pos))
		for j, i := range pos {
			at[i] = j
		}
		tr := &features.Dense{NRows: len(rows), NCols: x.NCols, Data: make([]float64, 0, len(rows)*x.NCols)}
		for _, i := range rows {
			_, v := x.Row(at[i])
			tr.Data = append(tr.Data, v...)
		}
		sc, err := features.FitScaler(tr, ic.Names())
		if err != nil {
			return nil, fmt.Errorf("image features: %w", err)
		}
		m.Image, m.Scaler = &ic, sc
		xs, err := sc.Transform(x)
		if err != nil {
			return nil, err
		}
		full := &features.Dense{NRows: len(p.items), NCols: x.NCols, Data: make([]float64, len(p.items)*x.NCols)}
		for j, i := range pos {
			_, v := xs.Row(j)
			copy(full.Data[i*x.NCols:], v)
		}
		return full, nil
	}
	return nil, fmt.Errorf("unknown kind %q: want text or image", kind)
}

// train fits a machine on the items at rows with the consensus posterior as
// soft targets, measures it by grouped k-fold cross-validation, fits the
// temperature on the out-of-fold probabilities, and refits on all rows.
func train(p *project, post []float64, rows []int, cfg TrainConfig) (*trained, error) {
	return trainOn(p, post, rows, cfg, nil)
}

// trainOn is train; with shared not nil it reuses shared's feature
// extraction and feature rows of the archive (a follow-up question's
// machine in a question tree uses the first question's) instead of
// featurising again.
func trainOn(p *project, post []float64, rows []int, cfg TrainConfig, shared *trained) (*trained, error) {
	K := len(p.cb.Classes)
	kind := cfg.Kind
	if kind == "" {
		kind = projectKind(p)
	}
	skipped := 0
	kept := rows[:0:0]
	for _, i := range rows {
		if p.items[i].Kind == kind {
			kept = append(kept, i)
		} else {
			skipped++
		}
	}
	rows = kept
	if len(rows) == 0 {
		return nil, fmt.Errorf("%w: no labelled %s items to train on; label some items and run `loop consensus` first", ErrNothing, kind)
	}
	lname := learnerName(cfg.Learner, kind)
	fit, err := learnerFor(lname, cfg)
	if err != nil {
		return nil, err
	}
	// Targets: the consensus posterior, gold as certain; only classes with
	// some mass are modelled.
	mass := make([]float64, K)
	targets := make([][]float64, len(rows))
	fp := make([]string, len(rows))
	for j, i := range rows {
		t := slices.Clone(post[i*K : (i+1)*K])
		if g := p.gold[i]; g >= 0 {
			clear(t)
			t[g] = 1
		}
		for c, v := range t {
			mass[c] += v
		}
		targets[j] = t
		it := p.items[i]
		fp[j] = it.ID + "\x1f" + it.Text + it.SHA256 + "\x1f" + fmt.Sprint(t)
	}
	var present []int
	var missing []string
	for c := range K {
		if mass[c] > 1e-9 {
			present = append(present, c)
		} else {
			missing = append(missing, p.cb.Classes[c].Key)
		}
	}
	if len(present) < 2 {
		return nil, fmt.Errorf("the training items all have one class (%v); a classifier needs at least two classes with examples", p.cb.Keys())
	}
	sub := make([][]float64, len(rows))
	for j, t := range targets {
		s := make([]float64, len(present))
		sum := 0.0
		for k, c := range present {
			s[k] = t[c]
			sum += t[c]
		}
		for k := range s {
			s[k] /= sum
		}
		sub[j] = s
	}
	m := &learner.Machine{Kind: kind, Learner: lname, Classes: p.cb.Keys(), Present: present, Temperature: 1, Fingerprint: learner.Fingerprint(fp)}
	var all features.Matrix
	if shared != nil {
		m.Text, m.Image, m.Scaler = shared.m.Text, shared.m.Image, shared.m.Scaler
		all = shared.all
	} else {
		var err error
		if all, err = featurise(p, kind, rows, cfg, m); err != nil {
			return nil, err
		}
	}
	X := learner.Subset(all, rows)
	// Grouped k-fold (learner.GroupKFold): items of one parent stay together.
	folds := cfg.Folds
	if folds <= 0 {
		folds = 5
	}
	groups := make([]string, len(rows))
	grouped := false
	for j, i := range rows {
		groups[j] = p.items[i].Parent
		grouped = grouped || groups[j] != ""
		if groups[j] == "" {
			groups[j] = p.items[i].ID
		}
	}
	if ng := len(uniqueStrings(groups)); ng < folds {
		folds = ng
	}
	if folds < 2 {
		return nil, fmt.Errorf("%w: %d labelled items in one parent group cannot be cross-validated; label items of other parents", ErrNothing, len(rows))
	}
	cv, err := learner.CrossValidate(fit, X, sub, nil, groups, folds, cfg.Seed)
	if err != nil {
		return nil, fmt.Errorf("cross-validation: %w", err)
	}
	kp := len(present)
	nf := folds
	truth := make([]int, len(rows))
	for j := range rows {
		truth[j] = floats.MaxIdx(sub[j])
	}
	oofRaw := cv.Proba
	raw1 := tempered(oofRaw, 1)
	// Calibrate against the consensus class, the answer the verdict
	// counts agreement with.
	hard := make([][]float64, len(rows))
	for j, c := range truth {
		hard[j] = make([]float64, kp)
		hard[j][c] = 1
	}
	cal := learner.FitTemperature(raw1, hard)
	T := cal.Temperature
	if len(rows) < 10 {
		T, cal.ECEAfter = 1, cal.ECEBefore // too few rows to fit a temperature
	}
	m.Temperature = T
	before, after := cal.ECEBefore, cal.ECEAfter
	// Temperature scaling keeps each row's order, so the cross-validated
	// accuracy and macro-F1 are the same before and after it.
	acc, f1 := cv.Accuracy, cv.MacroF1
	final, err := fit.Fit(X, sub, nil)
	if err != nil {
		return nil, fmt.Errorf("training %s: %w", lname, err)
	}
	m.Model = final
	rep := &TrainReport{
		Learner: lname, Kind: kind, Rows: len(rows), Columns: all.Cols(), Classes: m.Classes, Missing: missing,
		Temperature: T, Fingerprint: m.Fingerprint, Skipped: skipped,
		CV: CVMetrics{Folds: nf, Grouped: grouped, Rows: len(rows), Accuracy: acc, MacroF1: f1, ECEBefore: before, ECEAfter: after},
	}
	m.Metrics, _ = json.Marshal(rep.CV)
	// Out-of-fold probabilities over all codebook classes, calibrated.
	oof := make([]float64, len(rows)*K)
	for j := range rows {
		row := slices.Clone(oofRaw[j])
		learner.Temper(row, T)
		for a, c := range present {
			oof[j*K+c] = row[a]
		}
	}
	return &trained{m: m, rep: rep, rows: rows, oof: oof, design: X, all: all, fit: fit, sub: sub}, nil
}

func uniqueStrings(xs []string) []string {
	u := slices.Clone(xs)
	slices.Sort(u)
	return slices.Compact(u)
}

// tempered returns copies of the rows, tempered by T.
func tempered(rows [][]float64, T float64) [][]float64 {
	out := make([][]float64, len(rows))
	for j, r := range rows {
		out[j] = slices.Clone(r)
		learner.Temper(out[j], T)
	}
	return out
}

// learnerName is the learner configured, or by default logistic for text
// and forest for images.
func learnerName(name string, kind handoff.Kind) string {
	switch {
	case name != "":
		return name
	case kind == handoff.KindImage:
		return "forest"
	}
	return "logistic"
}

// learnerFor returns the configured learner.
func learnerFor(name string, cfg TrainConfig) (learner.Learner, error) {
	switch name {
	case "logistic":
		lambda := cfg.Lambda
		if lambda <= 0 {
			lambda = 0.1
		}
		return learner.Logistic{Lambda: lambda}, nil
	case "bayes":
		return learner.Bayes{}, nil
	case "forest":
		trees := cfg.Trees
		if trees <= 0 {
			trees = 200
		}
		return learner.Forest{Trees: trees, Seed: cfg.Seed}, nil
	}
	return nil, fmt.Errorf("unknown learner %q: want logistic, bayes or forest", name)
}

// committee fits size models on bootstrap resamples of the training rows
// (query-by-committee; Seung, Opper & Sompolinsky 1992, bagging as in Abe &
// Mamitsuka 1998) and returns each member's calibrated probabilities over all
// codebook classes for the items at rows of t.all; other items get nil.
func committee(t *trained, K, size int, rows []int, n int, seed uint64) ([][][]float64, error) {
	if t.fit == nil || t.design == nil {
		return nil, fmt.Errorf("query-by-committee needs the training data: run `loop round DIR --strategy committee`")
	}
	rng := rand.New(rand.NewPCG(seed, 0xc0ffee))
	out := make([][][]float64, size)
	kp := len(t.m.Present)
	X := learner.Subset(t.all, rows)
	for m := range size {
		boot := make([]int, len(t.rows))
		tg := make([][]float64, len(t.rows))
		for j := range boot {
			boot[j] = rng.IntN(len(t.rows))
			tg[j] = t.sub[boot[j]]
		}
		mod, err := t.fit.Fit(learner.Subset(t.design, boot), tg, nil)
		if err != nil {
			return nil, fmt.Errorf("committee member %d: %w (a bootstrap sample may miss a class; label more items)", m+1, err)
		}
		pr := make([]float64, len(rows)*kp)
		mod.PredictProbaInto(pr, X)
		out[m] = make([][]float64, n)
		for a, i := range rows {
			row := make([]float64, K)
			for j, c := range t.m.Present {
				row[c] = pr[a*kp+j]
			}
			out[m][i] = row
		}
	}
	return out, nil
}
