package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff"
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
				cb := s.Codebook()
				if !cb.Tree() && question == "" {
					rep, err := round.Consensus(s, cc, cli.Source(cmd))
					if err != nil {
						return err
					}
					return cli.Show(cmd, asJSON, rep, rep.Text(explain))
				}
				qs, err := questionsOf(cb, question)
				if err != nil {
					return err
				}
				var (
					reps []*round.ConsensusReport
					text strings.Builder
				)
				for _, q := range qs {
					key := cb.All()[q].Key
					rep, err := round.QuestionConsensus(s, key, cc, cli.Source(cmd))
					if err != nil {
						return err
					}
					reps = append(reps, rep)
					fmt.Fprintf(&text, "%s%s", questionHeader(cb, q, len(qs) > 1 && text.Len() > 0), rep.Text(explain))
				}
				if len(reps) == 1 {
					return cli.Show(cmd, asJSON, reps[0], text.String())
				}
				return cli.Show(cmd, asJSON, reps, text.String())
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

// questionsOf returns the questions a command works on: the one named by
// key, or ("" ) every question with parents first.
func questionsOf(cb handoff.Codebook, key string) ([]int, error) {
	if key == "" {
		return round.QuestionOrder(cb), nil
	}
	q, ok := cb.QuestionIndex(key)
	if !ok {
		var ks []string
		for _, x := range cb.All() {
			ks = append(ks, x.Key)
		}
		return nil, cli.Usagef("--question %q: not a question of the codebook (questions: %s)", key, strings.Join(ks, ", "))
	}
	return []int{q}, nil
}

// questionHeader names question q of a tree and when it is asked, as the
// first line of its section (after a blank line when gap).
func questionHeader(cb handoff.Codebook, q int, gap bool) string {
	var b strings.Builder
	if gap {
		b.WriteString("\n")
	}
	x := cb.All()[q]
	fmt.Fprintf(&b, "question %s", x.Key)
	if p := cb.Parent(q); p >= 0 {
		fmt.Fprintf(&b, " (asked when %s is %s)", cb.All()[p].Key, strings.Join(x.When.In, " or "))
	} else if q > 0 {
		b.WriteString(" (asked of every item)")
	}
	b.WriteString(":\n")
	return b.String()
}
