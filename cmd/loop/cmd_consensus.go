package main

import (
	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() {
	register(newConsensusCmd)
}

func newConsensusCmd() *cobra.Command {
	var (
		cfg      round.ConsensusConfig // the knobs that are not settings
		explain  bool
		asJSON   bool
		question string
	)
	c := &cobra.Command{
		Use:     "consensus DIR",
		Short:   "Clean and combine the crowd labels into one answer per item",
		Long:    helpLong("consensus"),
		Example: helpExample("consensus"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "combining", func(s *store.Store) error {
				rc, err := cli.ProjectConfig(s, over)
				if err != nil {
					return err
				}
				cc := rc.Consensus
				if cc.Reference != "" && cc.Debias == "" {
					return cli.Usagef("--reference-stratum needs --debias COVARIATE")
				}
				cc.Smoothing, cc.Strata, cc.Uncertain = cfg.Smoothing, cfg.Strata, cfg.Uncertain
				v, text, err := round.EachQuestion(s.Codebook(), question, func(key string) (*round.ConsensusReport, string, error) {
					rep, err := round.QuestionConsensus(s, key, cc, cli.Source(cmd))
					if err != nil {
						return nil, "", err
					}
					return rep, rep.Text(explain), nil
				})
				if err != nil {
					return cli.SettingUsage(err)
				}
				return cli.Show(cmd, asJSON, v, text)
			})
		},
	}
	fl := c.Flags()
	fl.Float64Var(&cfg.Smoothing, "smoothing", 0, "Dirichlet pseudo-count added to each confusion cell (dawid-skene, one-coin; the class prior only for hierarchical)")
	fl.IntVar(&cfg.Strata, "strata", 5, "quantile bins for a numeric covariate with many values")
	fl.Float64Var(&cfg.Uncertain, "uncertain-below", 0.95, "an item whose posterior is below this still needs labels")
	fl.StringVar(&question, "question", "", "combine only this question of a question tree (default: every question, parents first)")
	fl.BoolVar(&explain, "explain", false, "list every drop and flag of the cleaning rules")
	fl.BoolVar(&asJSON, "json", false, "print the full report as JSON")
	cli.BindSettings(c, append(cli.CleaningKeys, "method", "debias", "reference-stratum", "seed")...)
	return c
}
