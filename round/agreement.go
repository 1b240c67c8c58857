package round

import (
	"fmt"

	"handoff/crowd"
	"handoff/store"
)

// AgreementConfig says how agreement is measured.
type AgreementConfig struct {
	// Rules are the cleaning rules applied first (so only each annotator's
	// first label on an item counts, and dropped annotators are left out).
	Rules      crowd.Rules
	NoCleaning bool
	// Pairs asks for Cohen's kappa of every pair of annotators sharing at
	// least MinShared items.
	Pairs     bool
	MinShared int
	// Reps is the number of bootstrap replicates (0 means 1000).
	Reps int
	Seed uint64
}

// PairReport is Cohen's kappa of two annotators.
type PairReport struct {
	A     string         `json:"a"`
	B     string         `json:"b"`
	Kappa crowd.Estimate `json:"kappa"`
}

// AnnotatorKappa is one annotator's kappa against the leave-one-out
// consensus.
type AnnotatorKappa struct {
	ID     string         `json:"id"`
	Labels int            `json:"labels"`
	Kappa  crowd.Estimate `json:"kappa"`
}

// AgreementReport is the crowd's agreement: Fleiss' kappa, Krippendorff's
// alpha under the four metrics, pairwise Cohen's kappa and each annotator's
// kappa against the leave-one-out majority, with bootstrap 95% intervals.
type AgreementReport struct {
	Question    string                          `json:"question,omitempty"` // the question's key in a question tree
	Ordinal     bool                            `json:"ordinal"`            // the codebook's classes are ordered
	Items       int                             `json:"items"`
	Labels      int                             `json:"labels"`
	Annotators  int                             `json:"annotators"`
	Fleiss      crowd.Estimate                  `json:"fleiss_kappa"`
	FleissPo    float64                         `json:"fleiss_po"`
	FleissPe    float64                         `json:"fleiss_pe"`
	Alpha       map[crowd.Metric]crowd.Estimate `json:"krippendorff_alpha"`
	Pairs       []PairReport                    `json:"pairs,omitempty"`
	LeaveOneOut []AnnotatorKappa                `json:"leave_one_out"`
}

// Agreement measures how well the crowd agrees with itself.
func Agreement(st *store.Store, cfg AgreementConfig) (*AgreementReport, error) {
	p, err := load(st)
	if err != nil {
		return nil, err
	}
	return agreement(p, cfg)
}

func agreement(p *project, cfg AgreementConfig) (*AgreementReport, error) {
	if p.labels.Len() == 0 {
		return nil, fmt.Errorf("%w: the project has no labels; add some with `loop labels add`", ErrNothing)
	}
	kept, _, _, err := p.clean(cfg.Rules, cfg.NoCleaning)
	if err != nil {
		return nil, fmt.Errorf("cleaning: %w", err)
	}
	a, err := crowd.Agree(kept, crowd.AgreementOptions{Reps: cfg.Reps, Seed: cfg.Seed, Pairs: cfg.Pairs, MinShared: cfg.MinShared})
	if err != nil {
		return nil, err
	}
	counts := make([]int, len(p.anns))
	items := map[int32]bool{}
	for j, an := range kept.Annotator {
		counts[an]++
		items[kept.Item[j]] = true
	}
	nann := 0
	for _, c := range counts {
		if c > 0 {
			nann++
		}
	}
	r := &AgreementReport{
		Ordinal: p.cb.IsOrdinal(), Items: len(items), Labels: kept.Len(), Annotators: nann,
		Fleiss: a.Fleiss, FleissPo: a.FleissPo, FleissPe: a.FleissPe, Alpha: a.Alpha,
	}
	for _, pk := range a.Pairs {
		r.Pairs = append(r.Pairs, PairReport{A: p.anns[pk.A], B: p.anns[pk.B], Kappa: pk.Kappa})
	}
	for _, l := range a.LeaveOneOut {
		r.LeaveOneOut = append(r.LeaveOneOut, AnnotatorKappa{ID: p.anns[l.Annotator], Labels: counts[l.Annotator], Kappa: l.Kappa})
	}
	return r, nil
}
