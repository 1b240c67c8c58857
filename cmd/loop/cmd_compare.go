package main

import (
	"io"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"handoff"
	"handoff/compare"
	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() { register(newCompareCmd) }

func newCompareCmd() *cobra.Command {
	var (
		cfg    round.CompareConfig
		waves  string
		asJSON bool
		html   string
	)
	c := &cobra.Command{
		Use:     "compare DIR",
		Short:   "Compare the crowd and the machine with expert codings, and one crowd wave with another",
		Long:    helpLong("compare"),
		Example: helpExample("compare"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if waves != "" {
				for _, f := range strings.Split(waves, ",") {
					w, err := strconv.Atoi(strings.TrimSpace(f))
					if err != nil || w < 1 || w > handoff.MaxWave {
						return cli.Usagef("--waves %q: give wave numbers 1–%d separated by commas, e.g. 1,2", waves, handoff.MaxWave)
					}
					cfg.Waves = append(cfg.Waves, w)
				}
				if len(cfg.Waves) < 2 {
					return cli.Usagef("--waves %q: name at least two waves to compare", waves)
				}
			}
			var rep *compare.Report
			if err := onStore(cmd, args[0], "comparing", func(s *store.Store) (err error) { rep, err = round.Compare(s, cfg); return err }); err != nil {
				return err
			}
			return cli.Report(cmd, html, "report with scatter plots", func(w io.Writer) error { return rep.WriteHTML(w, "Handoff comparisons — "+args[0]) },
				asJSON, rep, rep.WriteText)
		},
	}
	f := c.Flags()
	f.StringVar(&cfg.Reference, "reference", "", "compare with this reference coding only (default: every one)")
	f.StringVar(&waves, "waves", "", "compare these crowd waves, pair by pair, e.g. 1,2 (default: every wave with labels)")
	f.BoolVar(&asJSON, "json", false, "print JSON")
	f.StringVar(&html, "html", "", "also write an HTML report with scatter plots to this file")
	f.IntVar(&cfg.Options.Bootstrap.Reps, "reps", 2000, "bootstrap resamples")
	f.Uint64Var(&cfg.Options.Bootstrap.Seed, "seed", 0, "bootstrap seed (default: the project's seed)")
	f.IntVar(&cfg.Options.MinItems, "min-items", 10, "fewest items coded by both sides for item-level figures")
	f.IntVar(&cfg.Options.MinParents, "min-parents", 10, "fewest parents for parent-level figures")
	return c
}
