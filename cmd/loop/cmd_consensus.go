package main

import (
	"github.com/spf13/cobra"

	"handoff/round"
	"handoff/store"
)

func init() {
	register(newConsensusCmd)
}

func newConsensusCmd() *cobra.Command {
	var (
		cfg     round.ConsensusConfig // the knobs that are not settings
		explain bool
		asJSON  bool
	)
	c := &cobra.Command{
		Use:   "consensus DIR",
		Short: "Clean and combine the crowd labels into one answer per item",
		Long: `consensus applies the cleaning rules (each drop is recorded with its reason),
combines what is left into one posterior per item — Dawid–Skene by default,
or majority vote or one-coin — and stores it for the next steps. Each
annotator gets a confusion matrix and a reliability figure (expected accuracy).

With --debias COVARIATE it also corrects a bias that everyone shares and that
depends on the covariate (for example magnification): against gold items when
the project has them, otherwise against a stratum you name as unbiased with
--reference-stratum, assuming the true class mix is the same in every stratum.`,
		Example: `  loop consensus proj
  loop consensus proj --method majority --explain
  loop consensus proj --debias magnification --reference-stratum 40
  loop consensus proj --keep-repeats --no-cleaning --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := checkedOverrides(cmd)
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "combining", func(s *store.Store) error {
				rc, err := projectConfig(s, over)
				if err != nil {
					return err
				}
				cc := rc.Consensus
				if cc.Reference != "" && cc.Debias == "" {
					return usageErrorf("--reference-stratum needs --debias COVARIATE")
				}
				cc.Smoothing, cc.Strata, cc.Uncertain = cfg.Smoothing, cfg.Strata, cfg.Uncertain
				rep, err := round.Consensus(s, cc, source(cmd))
				if err != nil {
					return err
				}
				return show(cmd, asJSON, rep, rep.Text(explain))
			})
		},
	}
	fl := c.Flags()
	fl.Float64Var(&cfg.Smoothing, "smoothing", 0, "Dirichlet pseudo-count added to each confusion cell (dawid-skene, one-coin; the class prior only for hierarchical)")
	fl.IntVar(&cfg.Strata, "strata", 5, "quantile bins for a numeric covariate with many values")
	fl.Float64Var(&cfg.Uncertain, "uncertain-below", 0.95, "an item whose posterior is below this still needs labels")
	fl.BoolVar(&explain, "explain", false, "list every drop and flag of the cleaning rules")
	fl.BoolVar(&asJSON, "json", false, "print the full report as JSON")
	bindSettings(c, append(cleaningKeys, "method", "debias", "reference-stratum", "seed")...)
	return c
}
