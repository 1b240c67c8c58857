package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/plan"
	"handoff/round"
	"handoff/verdict"
)

func init() { register(newCurvesCmd) }

func newCurvesCmd() *cobra.Command {
	var (
		cfg    plan.ProjectCurveConfig
		seeds  int
		html   string
		asJSON bool
	)
	c := &cobra.Command{
		Use:     "curves DIR",
		Short:   "Does picking unsure items beat random picks on this project? Simulated learning curves",
		Long:    helpLong("curves"),
		Example: helpExample("curves"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			if seeds < 1 {
				return cli.Usagef("--seeds %d: want at least 1", seeds)
			}
			cfg.Seeds = make([]uint64, seeds)
			for i := range cfg.Seeds {
				cfg.Seeds[i] = uint64(i + 1)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rc, err := cli.ProjectConfig(s, over)
			if err != nil {
				return err
			}
			cfg.Train = rc.Train
			cmp, err := plan.ProjectCurves(s, cfg)
			if err != nil {
				return err
			}
			var rep *verdict.Report
			if html != "" {
				if rep, err = round.Verdict(s, round.VerdictConfig{}); err != nil {
					return fmt.Errorf("--html shows the curves in the latest round's verdict report: %w", err)
				}
				rep = cmp.InReport(rep)
			}
			return cli.Report(cmd, html, "report", func(w io.Writer) error { return rep.WriteHTML(w, "Handoff learning curves — "+args[0]) },
				asJSON, cmp, func(w io.Writer) error { _, err := io.WriteString(w, cmp.Text()); return err })
		},
	}
	cli.BindSettings(c, "learner", "features", "lambda", "folds")
	fl := c.Flags()
	fl.IntVar(&seeds, "seeds", 5, "number of seeds to average over (1..N)")
	fl.IntVar(&cfg.Curve.MaxLabels, "max", 0, "last budget (default: 1000, or ¾ of the items left after the test set if fewer)")
	fl.IntVar(&cfg.Curve.Initial, "initial", 0, "items labelled at random first (default: 50, fewer on small projects)")
	fl.IntVar(&cfg.Curve.Batch, "batch", 0, "items picked per step (default: 50, fewer on small projects)")
	fl.StringVar(&html, "html", "", "write the latest round's verdict report with these curves to this file")
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
