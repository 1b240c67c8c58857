package round

import (
	"gonum.org/v1/gonum/floats"

	"handoff"
	"handoff/features"
	"handoff/learner"
	"handoff/store"
)

// LabelledSet is a project's labelled items of one kind with their
// consensus classes: the oracle of a simulated learning curve (package
// plan). Its items are every item of the kind with crowd labels or gold,
// in store order, held-out members included.
type LabelledSet struct {
	// Y is each item's class: a gold item's expert class, otherwise its
	// most probable consensus class (the first on ties).
	Y []int
	// K is the number of codebook classes.
	K int
	// Learner is the learner Train would fit with the configuration
	// (TrainConfig.Learner, Lambda, Trees, Seed).
	Learner learner.Learner

	p    *project
	kind handoff.Kind
	rows []int // item positions, one per entry of Y
	cfg  TrainConfig
}

// Labelled reads the project and its stored consensus and returns its
// labelled items of the kind cfg.Kind ("" means the kind most items have).
// It returns an error wrapping ErrNothing when no consensus was stored yet.
func Labelled(st *store.Store, cfg TrainConfig) (*LabelledSet, error) {
	p, _, post, nl, err := withConsensus(st)
	if err != nil {
		return nil, err
	}
	K := len(p.cb.Classes)
	s := &LabelledSet{K: K, p: p, kind: cfg.Kind, cfg: cfg}
	if s.kind == "" {
		s.kind = projectKind(p)
	}
	for i, it := range p.items {
		if it.Kind != s.kind {
			continue
		}
		switch {
		case p.gold[i] >= 0:
			s.Y = append(s.Y, p.gold[i])
		case nl[i] > 0:
			s.Y = append(s.Y, floats.MaxIdx(post[i*K:(i+1)*K]))
		default:
			continue
		}
		s.rows = append(s.rows, i)
	}
	if s.Learner, err = learnerFor(learnerName(cfg.Learner, s.kind), cfg); err != nil {
		return nil, err
	}
	return s, nil
}

// Features fits the feature extraction on the set's items, without their
// labels, as Train would, and returns their feature rows, one per entry of
// Y.
func (s *LabelledSet) Features() (features.Matrix, error) {
	all, err := featurise(s.p, s.kind, s.rows, s.cfg, &learner.Machine{})
	if err != nil {
		return nil, err
	}
	return learner.Subset(all, s.rows), nil
}
