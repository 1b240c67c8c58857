package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff/crowd"
	"handoff/round"
)

func init() { register(newAgreementCmd) }

func newAgreementCmd() *cobra.Command {
	var (
		cfg    round.AgreementConfig
		clean  cleaningFlags
		asJSON bool
		pairs  bool
	)
	c := &cobra.Command{
		Use:   "agreement DIR",
		Short: "How well the crowd agrees: Fleiss' kappa, Krippendorff's alpha, Cohen's kappa",
		Long: `agreement measures the crowd's agreement with itself after the cleaning rules
(only each annotator's first label on an item counts): Fleiss' kappa,
Krippendorff's alpha (nominal; for an ordinal codebook also the ordinal,
interval and ratio metrics, with classes standing for 1, 2, …; missing labels
allowed), Cohen's kappa for each pair of annotators who share
enough items (--pairs), and each annotator's Cohen's kappa against the
leave-one-out majority of the others. Every figure has a seeded bootstrap 95%
interval over items.`,
		Example: `  loop agreement proj
  loop agreement proj --pairs --min-shared 20
  loop agreement proj --json | jq '.krippendorff_alpha.ordinal'`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			cfg.Rules = clean.rules()
			cfg.NoCleaning = clean.noCleaning
			cfg.Pairs = pairs
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			bar := newProgress(cmd, -1, "bootstrapping")
			r, err := round.Agreement(s, cfg)
			bar.Finish()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, r)
			}
			outf(cmd, "%s", agreementText(r))
			return nil
		},
	}
	fl := c.Flags()
	fl.BoolVar(&pairs, "pairs", false, "also Cohen's kappa for every pair of annotators sharing enough items")
	fl.IntVar(&cfg.MinShared, "min-shared", 10, "pairs: fewest shared items")
	fl.IntVar(&cfg.Reps, "reps", 1000, "bootstrap replicates")
	fl.Uint64Var(&cfg.Seed, "seed", 1, "bootstrap seed")
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	clean.bind(c)
	return c
}

func estimate(e crowd.Estimate) string {
	if !e.Defined {
		return "undefined (" + e.Note + ")"
	}
	if e.Reps == 0 {
		return fmt.Sprintf("%.3f", e.Value)
	}
	return fmt.Sprintf("%.3f [%.3f, %.3f]", e.Value, e.Lo, e.Hi)
}

func agreementText(r *round.AgreementReport) string {
	var b strings.Builder
	fmt.Fprintf(&b, "agreement over %d items, %d labels, %d annotators (95%% bootstrap intervals)\n", r.Items, r.Labels, r.Annotators)
	fmt.Fprintf(&b, "  Fleiss' kappa          %s   (P̄ %.3f, P̄e %.3f)\n", estimate(r.Fleiss), r.FleissPo, r.FleissPe)
	for _, m := range crowd.Metrics {
		if m != crowd.MetricNominal && !r.Ordinal {
			continue // order-based metrics mean nothing for unordered classes
		}
		if e, ok := r.Alpha[m]; ok {
			fmt.Fprintf(&b, "  Krippendorff's alpha, %-8s %s\n", m, estimate(e))
		}
	}
	if len(r.Pairs) > 0 {
		b.WriteString("pairs (Cohen's kappa):\n")
		for _, p := range r.Pairs {
			fmt.Fprintf(&b, "  %s × %s  %s  (%d items)\n", p.A, p.B, estimate(p.Kappa), p.Kappa.N)
		}
	}
	// Annotators with no label left after cleaning have no kappa: they are
	// listed once, apart, not as a row of "undefined".
	var l []round.AnnotatorKappa
	var none []string
	for _, a := range r.LeaveOneOut {
		if a.Labels == 0 {
			none = append(none, a.ID)
		} else {
			l = append(l, a)
		}
	}
	sortBy(l, func(a, b round.AnnotatorKappa) bool { return a.Kappa.Value < b.Kappa.Value })
	if len(l) > 0 {
		b.WriteString("each annotator against the leave-one-out majority (Cohen's kappa), lowest first:\n")
	}
	for _, a := range l {
		fmt.Fprintf(&b, "  %-20s %s  (%d items)\n", a.ID, estimate(a.Kappa), a.Kappa.N)
	}
	if len(none) > 0 {
		fmt.Fprintf(&b, "not counted, with no label left after the cleaning rules (`loop consensus DIR` says why), %d: %s\n", len(none), strings.Join(none, ", "))
	}
	return b.String()
}
