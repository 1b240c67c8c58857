package main

import (
	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() { register(newAgreementCmd) }

func newAgreementCmd() *cobra.Command {
	var (
		cfg      round.AgreementConfig
		asJSON   bool
		question string
	)
	c := &cobra.Command{
		Use:     "agreement DIR",
		Short:   "How well the crowd agrees: Fleiss' kappa, Krippendorff's alpha, Cohen's kappa",
		Long:    helpLong("agreement"),
		Example: helpExample("agreement"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "bootstrapping", func(s *store.Store) error {
				rc, err := cli.ProjectConfig(s, over)
				if err != nil {
					return err
				}
				cfg.Rules, cfg.NoCleaning, cfg.Seed = rc.Consensus.Rules, rc.Consensus.NoCleaning, rc.Seed
				v, text, err := round.EachQuestion(s.Codebook(), question, func(key string) (*round.AgreementReport, string, error) {
					rep, err := round.QuestionAgreement(s, key, cfg)
					if err != nil {
						return nil, "", err
					}
					return rep, rep.Text(), nil
				})
				if err != nil {
					return cli.SettingUsage(err)
				}
				return cli.Show(cmd, asJSON, v, text)
			})
		},
	}
	fl := c.Flags()
	fl.BoolVar(&cfg.Pairs, "pairs", false, "also Cohen's kappa for every pair of annotators sharing enough items")
	fl.IntVar(&cfg.MinShared, "min-shared", 10, "pairs: fewest shared items")
	fl.IntVar(&cfg.Reps, "reps", 1000, "bootstrap replicates")
	fl.StringVar(&question, "question", "", "measure only this question of a question tree (default: every question, one section each)")
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	cli.BindSettings(c, append(cli.CleaningKeys, "seed")...)
	return c
}
