package main

import (
	"strconv"
	"strings"

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
			for _, f := range strings.Split(lpi, ",") {
				n, err := strconv.Atoi(strings.TrimSpace(f))
				if err != nil || n < 1 {
					return cli.Usagef("--labels-per-item %q: want a comma-separated list of positive whole numbers", lpi)
				}
				cfg.LabelsPerItem = append(cfg.LabelsPerItem, n)
			}
			if prevalence != "" {
				for _, f := range strings.Split(prevalence, ",") {
					x, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
					if err != nil {
						return cli.Usagef("--prevalence %q: want comma-separated shares", prevalence)
					}
					spec.Prevalence = append(spec.Prevalence, x)
				}
			}
			if perAnn != "" {
				lo, hi, ok := strings.Cut(perAnn, "-")
				if !ok {
					hi = lo
				}
				a, err1 := strconv.Atoi(strings.TrimSpace(lo))
				b, err2 := strconv.Atoi(strings.TrimSpace(hi))
				if err1 != nil || err2 != nil || a < 1 || b < a {
					return cli.Usagef("--labels-per-annotator %q: want MIN-MAX (e.g. 10-70) or one whole number ≥ 1", perAnn)
				}
				spec.MinLabels, spec.MaxLabels = a, b
			}
			for _, sh := range shared {
				f := strings.Split(sh, ":")
				if len(f) != 3 {
					return cli.Usagef("--shared %q: want FROM:TO:RATE, e.g. c1:c2:0.3", sh)
				}
				rate, err := strconv.ParseFloat(f[2], 64)
				if err != nil {
					return cli.Usagef("--shared %q: rate %q is not a number", sh, f[2])
				}
				spec.Shared = append(spec.Shared, sim.Shared{From: f[0], To: f[1], Rate: rate})
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
