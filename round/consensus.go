package round

import (
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/crowd"
	"handoff/store"
)

// ConsensusConfig says how crowd labels are cleaned and combined.
type ConsensusConfig struct {
	// Method is auto (default: the hierarchical model unless another model
	// predicts held-out labels clearly better), hierarchical, one-coin,
	// majority or dawid-skene (plain, no prior).
	Method string `json:"method"`
	// Rules are the cleaning rules (crowd.DefaultRules when zero and
	// NoCleaning is false).
	Rules      crowd.Rules `json:"rules"`
	NoCleaning bool        `json:"no_cleaning,omitempty"`
	// Smoothing is the Dirichlet pseudo-count of the EM methods.
	Smoothing float64 `json:"smoothing,omitempty"`
	// Debias names a covariate whose strata carry a bias everyone shares
	// ("" for none). The bias is estimated against gold items, or, when
	// Reference names a stratum, against that stratum (taken as unbiased,
	// with the same true class mix everywhere) even if there is gold. Strata is the number of quantile bins for a numeric
	// covariate with more than 12 distinct values (0 means 5); a covariate
	// with at most 12 distinct values is taken value by value.
	Debias    string `json:"debias,omitempty"`
	Reference string `json:"reference,omitempty"`
	Strata    int    `json:"strata,omitempty"`
	// Uncertain is the posterior below which an item still needs labels
	// (0 means 0.95).
	Uncertain float64 `json:"uncertain,omitempty"`
	Seed      uint64  `json:"seed"`
}

// DefaultConsensus returns the automatic model choice with the default
// cleaning rules.
func DefaultConsensus() ConsensusConfig {
	return ConsensusConfig{Method: crowd.MethodAuto, Rules: crowd.DefaultRules(), Uncertain: 0.95, Seed: 1}
}

// AnnotatorReport is one annotator's reliability after combining.
type AnnotatorReport struct {
	ID          string      `json:"id"`
	Labels      int         `json:"labels"` // labels kept after cleaning
	Dropped     int         `json:"dropped"`
	Reliability float64     `json:"reliability"` // expected accuracy under the class prior
	Spammer     float64     `json:"spammer"`     // spammer score (crowd.SpammerScore): 0 answers ignore the item, 1 perfect
	Confusion   [][]float64 `json:"confusion"`   // [true class][given class]
}

// DropReport is one cleaning drop or flag with names instead of numbers.
type DropReport struct {
	Rule      string `json:"rule"`
	Annotator string `json:"annotator"`
	Item      string `json:"item,omitempty"` // for a single dropped label
	Labels    int    `json:"labels"`
	Reason    string `json:"reason"`
	Flag      bool   `json:"flag,omitempty"` // flagged, not dropped
}

// StratumReport is one stratum's class shares before and after debiasing.
type StratumReport struct {
	Name   string    `json:"name"`
	Items  int       `json:"items"`
	Gold   int       `json:"gold"`
	Before []float64 `json:"before"`
	After  []float64 `json:"after"`
}

// DebiasReport says how a shared bias was corrected.
type DebiasReport struct {
	Covariate string          `json:"covariate"`
	Method    string          `json:"method"` // "gold" or "reference"
	Reference string          `json:"reference,omitempty"`
	Missing   int             `json:"missing"` // items without the covariate, left as they were
	Strata    []StratumReport `json:"strata"`
}

// ConsensusReport is what a consensus step did; it is stored beside the
// consensus (store.Consensus's meta).
type ConsensusReport struct {
	// Question is the question's key in a question tree ("" otherwise);
	// NotAsked counts the items a follow-up does not apply to (its parent's
	// consensus is outside its condition), which are not in Items.
	Question   string          `json:"question,omitempty"`
	NotAsked   int             `json:"not_asked,omitempty"`
	Config     ConsensusConfig `json:"config"`
	Classes    []string        `json:"classes"`
	Items      int             `json:"items"`
	LabelsIn   int             `json:"labels_in"`
	LabelsKept int             `json:"labels_kept"`
	NoLabels   int             `json:"no_labels"` // items with no labels after cleaning and no gold
	Uncertain  int             `json:"uncertain"` // items whose posterior is below Config.Uncertain
	Gold       int             `json:"gold"`
	Ties       int             `json:"ties,omitempty"`
	LogLik     float64         `json:"log_likelihood,omitempty"`
	Iterations int             `json:"iterations,omitempty"`
	Converged  bool            `json:"converged,omitempty"`
	// Model is the model used (for method auto: the one chosen); Choice
	// says why, and Hier holds the hierarchical model's estimated prior.
	Model      string              `json:"model"`
	Choice     *crowd.Choice       `json:"choice,omitempty"`
	Hier       *crowd.HierPrior    `json:"hier,omitempty"`
	Prior      []float64           `json:"prior"`
	Rules      []crowd.RuleSummary `json:"rules"`
	Drops      []DropReport        `json:"drops"`
	Annotators []AnnotatorReport   `json:"annotators"`
	Debias     *DebiasReport       `json:"debias,omitempty"`
}

// consensusResult is a consensus in memory, for the later steps of a round.
type consensusResult struct {
	report    *ConsensusReport
	posterior []float64 // NItems×K
	nlabels   []int32
	kept      *crowd.Labels
	cs        []handoff.Consensus
}

// Consensus cleans and combines the project's crowd labels, stores one
// consensus per item (with the report as its meta) and returns the report.
func Consensus(st *store.Store, cfg ConsensusConfig, source string) (*ConsensusReport, error) {
	p, err := load(st)
	if err != nil {
		return nil, err
	}
	cr, err := consensus(p, cfg)
	if err != nil {
		return nil, err
	}
	meta, err := json.Marshal(cr.report)
	if err != nil {
		return nil, err
	}
	if err := st.PutConsensus(cr.cs, meta, source); err != nil {
		return nil, err
	}
	return cr.report, nil
}

// StoredConsensus returns the stored consensus and its report, or
// ErrNothing when no consensus was computed yet.
func StoredConsensus(st *store.Store) ([]handoff.Consensus, *ConsensusReport, error) {
	cs, meta, err := st.Consensus()
	if err != nil {
		return nil, nil, err
	}
	if meta == nil {
		return nil, nil, fmt.Errorf("%w: no consensus yet; run `loop consensus DIR` first", ErrNothing)
	}
	var r ConsensusReport
	if err := json.Unmarshal(meta, &r); err != nil {
		return nil, nil, fmt.Errorf("reading the consensus report: %w", err)
	}
	return cs, &r, nil
}

func consensus(p *project, cfg ConsensusConfig) (*consensusResult, error) {
	if cfg.Method == "" {
		cfg.Method = crowd.MethodAuto
	}
	if cfg.Uncertain <= 0 {
		cfg.Uncertain = 0.95
	}
	if len(p.items) == 0 {
		return nil, fmt.Errorf("%w: the project has no items; add some with `loop items add`", ErrNothing)
	}
	if p.labels.Len() == 0 && !p.hasG {
		return nil, fmt.Errorf("%w: the project has no labels and no gold; add some with `loop labels add`", ErrNothing)
	}
	kept, cl, gold, err := p.clean(cfg.Rules, cfg.NoCleaning)
	if err != nil {
		return nil, fmt.Errorf("cleaning: %w", err)
	}
	opts := crowd.Options{Seed: cfg.Seed, Gold: gold, Smoothing: cfg.Smoothing}
	res, err := crowd.Combine(cfg.Method, kept, opts)
	if err != nil {
		return nil, fmt.Errorf("combining with %s: %w", cfg.Method, err)
	}
	if rules := cleaningRules(cfg.Rules, cfg.NoCleaning); rules.Spammers {
		k2, drops, sum := crowd.DropSpammers(kept, res, rules)
		cl.Summary = append(cl.Summary, sum)
		cl.Drops = append(cl.Drops, drops...)
		if len(drops) > 0 {
			kept = k2
			cl.Out = kept.Len()
			// The choice of model is kept: the spammers are gone, the crowd
			// is the same.
			m := res.Method
			choice := res.Choice
			if res, err = crowd.Combine(m, kept, opts); err != nil {
				return nil, fmt.Errorf("combining with %s after the spammer rule: %w", m, err)
			}
			res.Choice = choice
		}
	}
	spam := crowd.SpammerScores(res)
	K := len(p.cb.Classes)
	rep := &ConsensusReport{
		Config: cfg, Classes: p.cb.Keys(), Items: len(p.items),
		LabelsIn: p.labels.Len(), LabelsKept: kept.Len(), NoLabels: res.NoLabels,
		Ties: res.Ties, LogLik: res.LogLik, Iterations: res.Iterations, Converged: res.Converged,
		Prior: res.Prior, Rules: cl.Summary, Model: res.Method, Choice: res.Choice,
	}
	if res.Hier != nil {
		h := *res.Hier
		h.Skill = nil
		rep.Hier = &h
	}
	for _, g := range p.gold {
		if g >= 0 {
			rep.Gold++
		}
	}
	for _, d := range cl.Drops {
		dr := DropReport{Rule: d.Rule, Labels: d.Labels, Reason: d.Reason}
		if d.Annotator >= 0 && d.Annotator < len(p.anns) {
			dr.Annotator = p.anns[d.Annotator]
		}
		if d.Label >= 0 {
			dr.Item = p.items[p.labels.Item[d.Label]].ID
		}
		rep.Drops = append(rep.Drops, dr)
	}
	for _, f := range cl.Flags {
		dr := DropReport{Rule: f.Rule, Reason: f.Reason, Flag: true}
		if f.Annotator >= 0 && f.Annotator < len(p.anns) {
			dr.Annotator = p.anns[f.Annotator]
		}
		rep.Drops = append(rep.Drops, dr)
	}
	in := make([]int, len(p.anns))
	out := make([]int, len(p.anns))
	for _, a := range p.labels.Annotator {
		in[a]++
	}
	for _, a := range kept.Annotator {
		out[a]++
	}
	for a, id := range p.anns {
		if p.ofTree && in[a] == 0 {
			continue // answered other questions of the tree only
		}
		conf := make([][]float64, K)
		for t := range K {
			conf[t] = append([]float64(nil), res.Confusion[(a*K+t)*K:(a*K+t+1)*K]...)
		}
		rep.Annotators = append(rep.Annotators, AnnotatorReport{
			ID: id, Labels: out[a], Dropped: in[a] - out[a], Reliability: res.Reliability[a], Spammer: spam[a], Confusion: conf,
		})
	}
	post := res.Posterior
	if cfg.Debias != "" {
		dr, corrected, err := debias(p, cfg, res, gold)
		if err != nil {
			return nil, err
		}
		rep.Debias = dr
		post = corrected
	}
	cr := &consensusResult{report: rep, posterior: post, nlabels: res.NLabels, kept: kept}
	cr.cs = make([]handoff.Consensus, len(p.items))
	keys := p.cb.Keys()
	for i, it := range p.items {
		row := post[i*K : (i+1)*K]
		best := floats.MaxIdx(row)
		method := res.Method
		if p.gold[i] >= 0 {
			method = "gold"
		}
		cr.cs[i] = handoff.Consensus{Item: it.ID, Class: keys[best], Posterior: append([]float64(nil), row...), Method: method, Labels: int(res.NLabels[i])}
		if res.NLabels[i] > 0 && p.gold[i] < 0 && row[best] < cfg.Uncertain {
			rep.Uncertain++
		}
	}
	return cr, nil
}

// debias corrects the posterior for a bias shared by everyone that depends
// on the covariate cfg.Debias (see crowd.Debias).
func debias(p *project, cfg ConsensusConfig, res *crowd.Result, gold []int) (*DebiasReport, []float64, error) {
	vals := make([]string, len(p.items))
	missing := 0
	distinct := map[string]bool{}
	numeric := true
	for i, it := range p.items {
		v, ok := it.Covariates[cfg.Debias]
		v = strings.TrimSpace(v)
		if !ok || v == "" {
			missing++
			continue
		}
		vals[i] = v
		distinct[v] = true
		if _, err := strconv.ParseFloat(v, 64); err != nil {
			numeric = false
		}
	}
	if len(distinct) == 0 {
		return nil, nil, fmt.Errorf("debias: no item has the covariate %q; check the name with `loop status DIR --json`", cfg.Debias)
	}
	var s crowd.Strata
	var err error
	if numeric && len(distinct) > 12 {
		f := make([]float64, len(vals))
		for i, v := range vals {
			if v == "" {
				f[i] = math.NaN()
				continue
			}
			f[i], _ = strconv.ParseFloat(v, 64)
		}
		n := cfg.Strata
		if n <= 0 {
			n = 5
		}
		s, err = crowd.QuantileStrata(f, n)
		if err != nil {
			return nil, nil, fmt.Errorf("debias: binning %q: %w", cfg.Debias, err)
		}
	} else {
		s = crowd.CategoricalStrata(vals)
		if numeric {
			s = sortNumericStrata(s)
		}
	}
	ref := -1
	if cfg.Reference != "" {
		for j, n := range s.Names {
			if n == cfg.Reference {
				ref = j
			}
		}
		if ref < 0 {
			return nil, nil, fmt.Errorf("debias: reference stratum %q is not a value of %q (values: %s)", cfg.Reference, cfg.Debias, strings.Join(s.Names, ", "))
		}
	}
	// A named reference stratum wins over gold: the user chose it.
	if ref >= 0 {
		gold = nil
	}
	if gold == nil && ref < 0 {
		return nil, nil, fmt.Errorf("debias: the project has no gold, so name the stratum taken as unbiased with --reference-stratum (values of %q: %s)", cfg.Debias, strings.Join(s.Names, ", "))
	}
	d, err := crowd.Debias(res.Posterior, res.NClasses, s, crowd.DebiasOptions{Gold: gold, Reference: ref, Prior: res.Prior})
	if err != nil {
		return nil, nil, fmt.Errorf("debias by %q: %w", cfg.Debias, err)
	}
	rep := &DebiasReport{Covariate: cfg.Debias, Method: d.Method, Reference: cfg.Reference, Missing: missing}
	for j, n := range s.Names {
		rep.Strata = append(rep.Strata, StratumReport{Name: n, Items: d.Items[j], Gold: d.Gold[j], Before: d.Before[j], After: d.After[j]})
	}
	return rep, d.Posterior, nil
}

// sortNumericStrata orders categorical strata of numeric values by value.
func sortNumericStrata(s crowd.Strata) crowd.Strata {
	order := make([]int, len(s.Names))
	for i := range order {
		order[i] = i
	}
	num := func(i int) float64 { f, _ := strconv.ParseFloat(s.Names[i], 64); return f }
	sort.SliceStable(order, func(a, b int) bool { return num(order[a]) < num(order[b]) })
	newOf := make([]int, len(order))
	names := make([]string, len(order))
	for newi, old := range order {
		newOf[old] = newi
		names[newi] = s.Names[old]
	}
	of := make([]int, len(s.Of))
	for i, o := range s.Of {
		if o < 0 {
			of[i] = -1
		} else {
			of[i] = newOf[o]
		}
	}
	return crowd.Strata{Of: of, Names: names}
}
