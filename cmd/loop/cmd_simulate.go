package main

import (
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"handoff/plan"
	"handoff/sim"
)

func init() { register(newSimulateCmd) }

func newSimulateCmd() *cobra.Command {
	var (
		spec       = sim.CrowdSpec{Careful: 0.3, Average: 0.4, Careless: 0.2, Spammer: 0.1, Classes: 4, Items: 2000, Annotators: 100}
		lpi        string
		prevalence string
		cfg        plan.RedundancyConfig
		asJSON     bool
	)
	c := &cobra.Command{
		Use:   "simulate",
		Short: "Plan a project: consensus accuracy by method and labels per item",
		Long: `simulate describes a crowd before a project starts — the shares of careful,
average and careless annotators and of spammers, the classes and their
prevalence — simulates it, and reports the consensus accuracy of each
combining method at each number of labels per item, so a team can choose its
redundancy and budget. The simulated crowds are invented; treat the figures
as a guide, and check them against a pilot with gold items.`,
		Example: `  loop simulate
  loop simulate --spammer 0.2 --careful 0.2 --labels-per-item 1,3,5,7,9
  loop simulate --classes 3 --prevalence 0.7,0.2,0.1 --items 5000 --json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			for _, f := range strings.Split(lpi, ",") {
				n, err := strconv.Atoi(strings.TrimSpace(f))
				if err != nil || n < 1 {
					return usageErrorf("--labels-per-item %q: want a comma-separated list of positive whole numbers", lpi)
				}
				cfg.LabelsPerItem = append(cfg.LabelsPerItem, n)
			}
			if prevalence != "" {
				for _, f := range strings.Split(prevalence, ",") {
					x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
					if err != nil {
						return usageErrorf("--prevalence %q: want comma-separated shares", prevalence)
					}
					spec.Prevalence = append(spec.Prevalence, x)
				}
			}
			cfg.Spec = spec
			bar := newProgress(cmd, -1, "simulating")
			cells, err := plan.Redundancy(cfg)
			bar.Finish()
			if err != nil {
				return usageErrorf("%v", err)
			}
			if asJSON {
				return printJSON(cmd, cells)
			}
			outf(cmd, "%s", plan.RedundancyText(cells, cfg))
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
	fl.IntVar(&spec.Annotators, "annotators", spec.Annotators, "annotators per simulated project")
	fl.StringVar(&lpi, "labels-per-item", "1,3,5,7", "labels per item to compare, comma-separated")
	fl.IntVar(&cfg.Seeds, "projects", 3, "simulated projects per setting")
	fl.Uint64Var(&cfg.Seed, "seed", 1, "seed")
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
