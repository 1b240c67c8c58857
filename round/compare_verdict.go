package round

import (
	"fmt"

	"handoff/compare"
	"handoff/store"
	"handoff/verdict"
)

// Verdict returns the verdict of the latest round (see verdictOf), and,
// when the project has reference codings or labels of more than one crowd
// wave, the comparisons with them (Compare) in its Codings, so that the
// report shows how good the crowd's consensus is that the machine is
// measured against; in a question tree, every question's figures and
// verdict in its Questions. The comparisons never change the decision; the
// stored round is left as it was.
func Verdict(st *store.Store, cfg VerdictConfig) (*verdict.Report, error) {
	rep, err := verdictOf(st, cfg)
	if err != nil {
		return nil, err
	}
	if r, err := Latest(st); err == nil && len(r.Questions) > 0 {
		c := *rep
		c.Questions = r.Summaries()
		rep = &c
	}
	refs, err := st.References()
	if err != nil {
		return nil, err
	}
	waves, err := st.HasWaves()
	if err != nil {
		return nil, err
	}
	if len(refs) == 0 && !waves {
		return rep, nil
	}
	cmp, err := Compare(st, CompareConfig{Options: compare.Options{Bootstrap: compare.Bootstrap{Reps: 1000}}})
	if err != nil {
		return nil, fmt.Errorf("comparing with independent codings: %w", err)
	}
	if len(cmp.Comparisons) == 0 {
		return rep, nil
	}
	c := *rep
	c.Codings = cmp
	return &c, nil
}
