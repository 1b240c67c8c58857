package round

import (
	"slices"

	"handoff/crowd"
	"handoff/store"
	"handoff/verdict"
)

// VerdictConfig overrides the latest round's verdict settings; zero values
// keep the round's.
type VerdictConfig struct {
	MaxError, Confidence          float64
	RequireCeiling, RequireStable bool
}

// Verdict returns the verdict of the latest round. When cfg changes a
// setting, or when audited machine labels exist, it is recomputed from the
// latest model and the labels as they are now (the consensus is recomputed in
// memory with the round's settings, so audit labels added since count; the
// learning curve and stop set are the rounds').
func Verdict(st *store.Store, cfg VerdictConfig) (*verdict.Report, error) {
	r, err := Latest(st)
	if err != nil {
		return nil, err
	}
	s, err := loadState(st)
	if err != nil {
		return nil, err
	}
	opt := r.Config.Verdict
	changed := false
	if cfg.MaxError > 0 && cfg.MaxError != opt.MaxError {
		opt.MaxError, changed = cfg.MaxError, true
	}
	if cfg.Confidence > 0 && cfg.Confidence != opt.Confidence {
		opt.Confidence, changed = cfg.Confidence, true
	}
	if cfg.RequireCeiling != opt.RequireCeiling || cfg.RequireStable != opt.RequireStable {
		opt.RequireCeiling, opt.RequireStable, changed = cfg.RequireCeiling, cfg.RequireStable, true
	}
	if !changed && len(s.Audit) == 0 {
		return r.Verdict, nil
	}
	c, err := loadCurrent(st)
	if err != nil {
		return nil, err
	}
	p := c.p
	cr, err := consensus(p, r.Config.Consensus)
	if err != nil {
		return nil, err
	}
	K := len(p.cb.Classes)
	in := verdict.Input{Classes: p.cb.Keys(), StopSet: s.StopPreds, Curve: s.Curve}
	for _, id := range s.HeldOut {
		i, ok := p.index[id]
		if !ok || (cr.nlabels[i] == 0 && p.gold[i] < 0) {
			continue
		}
		in.Truth = append(in.Truth, argmax(cr.posterior[i*K:(i+1)*K]))
		in.Proba = append(in.Proba, slices.Clone(c.proba[i*K:(i+1)*K]))
	}
	for i, it := range p.items {
		if it.Kind != c.t.m.Kind || cr.nlabels[i] > 0 || p.gold[i] >= 0 {
			continue
		}
		if _, done := c.machine[it.ID]; done {
			continue
		}
		in.Archive = append(in.Archive, slices.Max(c.proba[i*K:(i+1)*K]))
	}
	if ag, err := crowd.Agree(cr.kept, crowd.AgreementOptions{Reps: -1, Seed: r.Config.Seed}); err == nil {
		for _, l := range ag.LeaveOneOut {
			if l.Kappa.Defined {
				in.Annotators = append(in.Annotators, verdict.Annotator{ID: p.anns[l.Annotator], Kappa: l.Kappa.Value, Items: l.Kappa.N})
			}
		}
	}
	in.Audit = auditCounts(p, cr, s, c.machine)
	return verdict.Compute(in, opt)
}
