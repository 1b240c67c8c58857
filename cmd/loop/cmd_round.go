package main

import (
	"errors"
	"fmt"
	"io"
	"strconv"

	"github.com/spf13/cobra"

	"handoff/export"
	"handoff/internal/cli"
	"handoff/learner"
	"handoff/round"
	"handoff/store"
)

func init() {
	register(newTrainCmd)
	register(newRoundCmd)
	register(newNextCmd)
	register(newVerdictCmd)
	register(newAutolabelCmd)
	register(newModelCmd)
}

func newTrainCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:   "train DIR",
		Short: "Train the machine on the stored consensus",
		Long: `train fits a classifier on the consensus of every crowd-labelled item (the
held-out set excepted), with the consensus posterior as soft targets so that
items the crowd is unsure of count less. It prints k-fold cross-validated
accuracy, macro-F1 and the expected calibration error before and after
temperature scaling, and stores the model.`,
		Example: `  loop consensus proj && loop train proj
  loop train proj --learner bayes
  loop train proj --features image --learner forest --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "training", func(s *store.Store) error {
				rc, err := cli.ProjectConfig(s, over)
				if err != nil {
					return err
				}
				r, err := round.Train(s, rc.Train, cli.Source(cmd))
				if err != nil {
					return err
				}
				return cli.Show(cmd, asJSON, r, r.Text())
			})
		},
	}
	cli.BindSettings(c, cli.TrainKeys...)
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

func newRoundCmd() *cobra.Command {
	var (
		asJSON bool
		force  bool
	)
	c := &cobra.Command{
		Use:   "round DIR",
		Short: "Run one round: consensus → train → score → verdict → next batch",
		Long: `round runs the whole loop once, as one step on one snapshot of the project
and one commit: it cleans and combines the crowd labels, trains the machine on
the labelled items outside the held-out set, scores the archive, reaches a
verdict on the held-out set and picks the next batch for people (each item with
its reason). Everything is stored as a numbered round in one transaction; the
same project and settings give the same results.

The settings are the project's (` + "`loop config DIR`" + `); a flag below overrides
one for this run only, and the output says so.

The held-out set is a random sample of the archive fixed at the first round
(settings held-out and held-out-min; see ` + "`loop config --help`" + `). Its items are
never trained on; the next batch asks people for their first labels (reason
held-out) and for more labels until each meets the reference standard
(reason reference: consensus posterior ≥ reference-level, default 0.99, or
reference-cap labels, default 9). The verdict counts only held-out items that
meet the standard; labelled ones below it count as disagreements wherever a
threshold covers them.

The verdict's error bound holds at the stated confidence over all rounds a team
runs before its first GO: α = 1 − confidence is spent across looks, look r
testing at α/(r(r+1)). Only rounds with labels new since the last one are looks:
without new labels a round changes nothing and says so (--force runs it anyway,
without adding a look).

In a question tree every question's consensus (a follow-up's conditional on
its parent's), machine and verdict are computed in the same round and
commit: one machine per question, trained on the items with a consensus for
it, all on one featurisation of the archive; the held-out figures, the bound
and GO per question, over the held-out items that reach it. The next batch
weighs the model's uncertainty over the tree (Σ over questions of the chance
an item reaches it times its machine's entropy; a question without a machine
counts at its largest entropy) and asks follow-ups people have not answered
yet — a question added later — on items labelled for the others.`,
		Example: `  loop round proj
  loop round proj -n 300 --strategy margin --max-error 0.03
  loop round particles --debias magnification --reference-stratum 40
  loop round proj --force --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "round", func(s *store.Store) error {
				r, err := round.RunWith(s, round.RunOptions{Overrides: over, Force: force}, cli.Source(cmd))
				if errors.Is(err, round.ErrNoNewLabels) {
					cli.Out(cmd, "round: %v\n", err)
					return nil
				}
				if err != nil {
					return cli.SettingUsage(err)
				}
				return cli.Show(cmd, asJSON, r, r.Text(args[0], over))
			})
		},
	}
	cli.BindSettings(c)
	c.Flags().BoolVar(&force, "force", false, "run the round even when no label is new since the last one (it is then not a new look)")
	c.Flags().BoolVar(&asJSON, "json", false, "print the round as JSON")
	return c
}

func newNextCmd() *cobra.Command {
	var (
		cfg         round.NextConfig
		format, out string
	)
	c := &cobra.Command{
		Use:   "next DIR",
		Short: "Write the next batch of items for people, each with its reason",
		Long: `next writes the batch the latest round chose — the same items with the same
reasons — as CSV or JSONL, ready for any crowd platform or the built-in
labelling page. Each item carries its reason:

  held-out        a random member of the held-out set without labels yet
  reference       a held-out item whose consensus is below the reference
                  standard: more labels
  model-vs-crowd  a confident crowd the model disputes (out-of-fold): expert review
  crowd-split     the crowd still disagrees: more labels
  model-unsure    the model is least sure: a label teaches it most
  audit           (with --audit N) a random machine-labelled item, to measure
                  the real error after handoff
  below-threshold (with --below-threshold) an item autolabel left for people
  new-question    (a question tree) an item people answered the other
                  questions on: ask only the follow-ups it names (a question
                  added later, or one its parent's consensus now asks)

With -n, --shares, --strategy, --diversity, --density, --balanced or --seed the
batch is picked again from the latest round's scores with those settings (the
archive is not featurised again unless --diversity or --density needs feature
rows) and stored as the round's batch, so the board hands out the same items.
Items of an earlier batch that nobody labelled go back to the pool at the next
round.`,
		Example: `  loop next proj --out batch.csv
  loop next proj -n 100 --shares model-unsure=0.6,held-out=0.3,reference=0.1
  loop next proj -n 100 --strategy margin --diversity cosine --format jsonl
  loop next proj --audit 150 --out audit.csv
  loop next proj --below-threshold --out people.csv`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if format != "csv" && format != "jsonl" {
				return cli.Usagef("--format %q: want csv or jsonl", format)
			}
			if cmd.Flags().Changed("audit") && cfg.Audit < 1 {
				return cli.Usagef("--audit %d: want a number of items ≥ 1", cfg.Audit)
			}
			var err error
			if cfg.Overrides, err = cli.Overrides(cmd); err != nil {
				return err
			}
			if cfg.BelowThreshold || cfg.Audit > 0 {
				if len(cfg.Overrides) > 1 || len(cfg.Overrides) == 1 && cfg.Overrides[0].Key != "batch" {
					return cli.Usagef("--audit and --below-threshold take no batch settings but -n")
				}
				if len(cfg.Overrides) == 1 {
					if cfg.Audit > 0 {
						return cli.Usagef("give the audit's size with --audit N, not -n")
					}
					probe := round.DefaultConfig() // -n is checked: it sets batch
					probe.Set("batch", cfg.Overrides[0].Value)
					cfg.N = probe.Batch
				}
				cfg.Overrides = nil
			}
			var b []round.BatchItem
			err = onStore(cmd, args[0], "", func(s *store.Store) (err error) {
				b, err = round.Next(s, cfg, cli.Source(cmd))
				return cli.SettingUsage(err)
			})
			if err != nil {
				return err
			}
			if err := cli.Write(cmd, out, func(w io.Writer) error { return export.WriteBatch(w, format, b) }); err != nil {
				return err
			}
			if out != "" && out != "-" {
				cli.Info(cmd, "wrote %d items to %s (%s)\n", len(b), out, round.Reasons(b))
			}
			return nil
		},
	}
	cli.BindSettings(c, "batch", "shares", "strategy", "diversity", "density", "balanced", "seed")
	fl := c.Flags()
	fl.IntVar(&cfg.Audit, "audit", 0, "instead: this many random machine-labelled items to audit")
	fl.BoolVar(&cfg.BelowThreshold, "below-threshold", false, "instead: the items autolabel left for people (-n caps how many)")
	fl.StringVar(&format, "format", "csv", "csv or jsonl")
	fl.StringVarP(&out, "out", "o", "", "output file (default: standard output)")
	return c
}

func newVerdictCmd() *cobra.Command {
	var (
		asJSON bool
		html   string
	)
	c := &cobra.Command{
		Use:   "verdict DIR",
		Short: "Is the machine good enough to take over? The handoff report",
		Long: `verdict reports, on the held-out set of the latest round — the held-out items
that meet the reference standard: accuracy, Cohen's kappa and macro-F1 of
machine against the reference with bootstrap intervals, per-class precision and
recall with exact intervals; the crowd ceiling and whether the machine agrees
with the reference on the items it would autolabel at least as often as the
median annotator agrees with the others (required for GO unless the setting
median-gate is off); the coverage–risk curve with Clopper–Pearson upper bounds
and the threshold chosen by fixed-sequence testing; with gold, a bound on the
machine's error against the truth (disagreement bound + the consensus's error
bound on gold); calibration; the stop rule; the learning curve, scored on one
fixed evaluation set, with the labels still needed when an estimate can be made;
and, after an audit, the real error of machine labels. It ends with GO
(threshold, coverage, bound) or NOT YET and the gates that held it back, and
prints the settings it used.

The bound's confidence holds over all rounds before the first GO: look r of the
verdict tests at α/(r(r+1)) (α = 1 − confidence), and the report says which look
it is. With --max-error, --confidence, --median-gate or --require-stable the
verdict is computed again from the latest round's stored scores for this report
only.`,
		Example: `  loop verdict proj
  loop verdict proj --max-error 0.03 --confidence 0.99
  loop verdict proj --html report.html
  loop verdict proj --json | jq .decision`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rep, err := round.Verdict(s, round.VerdictConfig{Overrides: over})
			if err != nil {
				return cli.SettingUsage(err)
			}
			if html != "" {
				if err := cli.Write(cmd, html, func(w io.Writer) error { return rep.WriteHTML(w, "Handoff verdict — "+args[0]) }); err != nil {
					return err
				}
				cli.Info(cmd, "report written to %s\n", html)
			}
			if asJSON {
				return rep.WriteJSON(cmd.OutOrStdout())
			}
			if html == "" || !cli.Quiet(cmd) {
				return rep.WriteText(cmd.OutOrStdout())
			}
			return nil
		},
	}
	cli.BindSettings(c, "max-error", "confidence", "median-gate", "require-stable")
	fl := c.Flags()
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	fl.StringVar(&html, "html", "", "also write a self-contained HTML report with plots to this file")
	return c
}

func newAutolabelCmd() *cobra.Command {
	var (
		threshold string
		force     bool
		asJSON    bool
	)
	c := &cobra.Command{
		Use:   "autolabel DIR",
		Short: "Write machine labels above the threshold; queue the rest for people",
		Long: `autolabel takes the latest round's scores of every item without crowd labels
(machine-labelled ones included, so a newer model relabels them; the archive is
not featurised again), writes a machine label (class, calibrated confidence,
model version, round) for each item at or above the threshold, and queues the rest for people (write them
with ` + "`loop next DIR --below-threshold`" + `). The threshold is the verdict's
(auto) unless you give one. Without a GO verdict it refuses unless --force.

In a question tree each question is written only where it has GO (with its own
threshold): a follow-up only on items whose parent answer — the crowd's
consensus, or else the parent's machine label — asks it. The rest stay for
people.

Machine labels are evidence, not truth: audit a random sample afterwards with
` + "`loop next DIR --audit N`" + `.`,
		Example: `  loop autolabel proj
  loop autolabel proj --threshold 0.9 --force`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			var cfg round.AutolabelConfig
			if threshold != "auto" {
				x, err := strconv.ParseFloat(threshold, 64)
				if err != nil || !(x > 0 && x <= 1) {
					return cli.Usagef("--threshold %q: want auto or a number in (0, 1]", threshold)
				}
				cfg.Threshold = x
			}
			cfg.Force = force
			err := onStore(cmd, args[0], "scoring", func(s *store.Store) error {
				r, err := round.Autolabel(s, cfg, cli.Source(cmd))
				if err != nil {
					return err
				}
				return cli.Show(cmd, asJSON, r, r.Text())
			})
			if err != nil || asJSON {
				return err
			}
			cli.Hint(cmd, "  next: `loop next %s --audit 100` to measure the real error\n", args[0])
			return nil
		},
	}
	c.Flags().StringVar(&threshold, "threshold", "auto", "auto (the verdict's) or a confidence in (0, 1]")
	c.Flags().BoolVar(&force, "force", false, "autolabel even without a GO verdict")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

func newModelCmd() *cobra.Command {
	c := &cobra.Command{
		Use:   "model",
		Short: "Work with trained models",
	}
	c.AddCommand(&cobra.Command{
		Use:   "export DIR FILE",
		Short: "Write the latest model, with the verdict's threshold, to a file",
		Long: `model export writes the latest round's model — feature configuration,
vocabulary or feature names, class keys, the training set's fingerprint, its
metrics and the verdict's autolabel threshold — to FILE, for bulk autolabelling
elsewhere (see beam/).`,
		Example: `  loop model export proj model.hom`,
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			m, r, err := round.LatestMachine(s)
			if err != nil {
				return err
			}
			if r.Verdict != nil && r.Verdict.Threshold.Found {
				m.Cutoff = r.Verdict.Threshold.Threshold
			}
			if err := cli.Write(cmd, args[1], func(w io.Writer) error { return learner.WriteMachine(w, m) }); err != nil {
				return err
			}
			cli.Info(cmd, "model %s written to %s (threshold %.4g)\n", m.Version(), args[1], m.Cutoff)
			return s.Record(cli.Source(cmd), "model.export", fmt.Sprintf("%s to %s", m.Version(), args[1]))
		},
	})
	return c
}
