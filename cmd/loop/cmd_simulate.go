package main

import (
	"strconv"

	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/plan"
	"handoff/sim"
)

func init() { register(newSimulateCmd) }

func newSimulateCmd() *cobra.Command {
	var (
		spec       = sim.CrowdSpec{Careful: 0.3, Average: 0.4, Careless: 0.2, Spammer: 0.1, Classes: 4, Items: 2000, Annotators: 100}
		lpi        string
		prevalence string
		perAnn     string
		shared     []string
		cfg        plan.RedundancyConfig
		asJSON     bool
	)
	c := &cobra.Command{
		Use:     "simulate",
		Short:   "Plan a project: consensus accuracy by method and labels per item",
		Long:    helpLong("simulate"),
		Example: helpExample("simulate"),
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			var err error
			if cfg.LabelsPerItem, err = cli.Numbers("labels-per-item", lpi, "a comma-separated list of positive whole numbers", strconv.Atoi, func(n int) bool { return n >= 1 }); err != nil {
				return err
			}
			if prevalence != "" {
				parse := func(f string) (float64, error) { return strconv.ParseFloat(f, 64) }
				if spec.Prevalence, err = cli.Numbers("prevalence", prevalence, "comma-separated shares", parse, func(float64) bool { return true }); err != nil {
					return err
				}
			}
			if perAnn != "" {
				if spec.MinLabels, spec.MaxLabels, err = sim.ParseLabelRange(perAnn); err != nil {
					return cli.Usagef("--labels-per-annotator %v", err)
				}
			}
			for _, sh := range shared {
				x, err := sim.ParseShared(sh)
				if err != nil {
					return cli.Usagef("--shared %v", err)
				}
				spec.Shared = append(spec.Shared, x)
			}
			if err := spec.Validate(); err != nil && cfg.LabelsPerItem != nil {
				probe := spec
				probe.LabelsPerItem = cfg.LabelsPerItem[0]
				if err := probe.Validate(); err != nil {
					return cli.Usagef("%v", err)
				}
			}
			cfg.Spec = spec
			bar := cli.Progress(cmd, -1, "simulating")
			cells, err := plan.Redundancy(cfg)
			bar.Finish()
			if err != nil {
				return cli.Usagef("%v", err)
			}
			if asJSON {
				return cli.JSON(cmd, cells)
			}
			cli.Out(cmd, "%s", plan.RedundancyText(cells, cfg))
			return nil
		},
	}
	fl := c.Flags()
	fl.Float64Var(&spec.Careful, "careful", spec.Careful, "share of careful annotators")
	fl.Float64Var(&spec.Average, "average", spec.Average, "share of average annotators")
	fl.Float64Var(&spec.Careless, "careless", spec.Careless, "share of careless annotators")
	fl.Float64Var(&spec.Spammer, "spammer", spec.Spammer, "share of spammers (answer at random)")
	fl.IntVar(&spec.Classes, "classes", spec.Classes, "number of classes")
	fl.StringVar(&prevalence, "prevalence", "", "true class shares, comma-separated (default: equal)")
	fl.IntVar(&spec.Items, "items", spec.Items, "items per simulated project")
	fl.IntVar(&spec.Annotators, "annotators", spec.Annotators, "annotators per simulated project (a dense crowd)")
	fl.StringVar(&perAnn, "labels-per-annotator", "", "a sparse crowd: each person gives MIN-MAX labels, e.g. 10-70")
	fl.Float64Var(&spec.OneClass, "one-class", 0, "sparse crowd: share of spammers who always give one class")
	fl.StringArrayVar(&shared, "shared", nil, "a confusion most people share, FROM:TO:RATE with classes c1, c2, … (repeatable)")
	fl.StringVar(&lpi, "labels-per-item", "1,3,5,7", "labels per item to compare, comma-separated")
	fl.IntVar(&cfg.Seeds, "projects", 3, "simulated projects per setting")
	fl.Uint64Var(&cfg.Seed, "seed", 1, "seed")
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
