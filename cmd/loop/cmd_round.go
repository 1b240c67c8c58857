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
	"handoff/verdict"
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
		Use:     "train DIR",
		Short:   "Train the machine on the stored consensus",
		Long:    helpLong("train"),
		Example: helpExample("train"),
		Args:    cobra.ExactArgs(1),
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
		Use:     "round DIR",
		Short:   "Run one round: consensus → train → score → verdict → next batch",
		Long:    helpLong("round"),
		Example: helpExample("round"),
		Args:    cobra.ExactArgs(1),
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
		Use:     "next DIR",
		Short:   "Write the next batch of items for people, each with its reason",
		Long:    helpLong("next"),
		Example: helpExample("next"),
		Args:    cobra.ExactArgs(1),
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
		Use:     "verdict DIR",
		Short:   "Is the machine good enough to take over? The handoff report",
		Long:    helpLong("verdict"),
		Example: helpExample("verdict"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			over, err := cli.Overrides(cmd)
			if err != nil {
				return err
			}
			var rep *verdict.Report
			if err := onStore(cmd, args[0], "", func(s *store.Store) (err error) {
				rep, err = round.Verdict(s, round.VerdictConfig{Overrides: over})
				return cli.SettingUsage(err)
			}); err != nil {
				return err
			}
			return cli.Report(cmd, html, "report", func(w io.Writer) error { return rep.WriteHTML(w, "Handoff verdict — "+args[0]) }, asJSON, rep, rep.WriteText)
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
		Use:     "autolabel DIR",
		Short:   "Write machine labels above the threshold; queue the rest for people",
		Long:    helpLong("autolabel"),
		Example: helpExample("autolabel"),
		Args:    cobra.ExactArgs(1),
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
		Use:     "export DIR FILE",
		Short:   "Write the latest model, with the verdict's threshold, to a file",
		Long:    helpLong("model-export"),
		Example: helpExample("model-export"),
		Args:    cobra.ExactArgs(2),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
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
		}),
	})
	return c
}
