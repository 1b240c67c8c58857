package main

import (
	"path/filepath"
	"slices"

	"github.com/spf13/cobra"

	"handoff/demo"
	"handoff/internal/cli"
)

func init() { register(newDemoCmd) }

func newDemoCmd() *cobra.Command {
	var cfg demo.Config
	c := &cobra.Command{
		Use:     "demo DIR",
		Short:   "Build and run an invented demo: the whole job from crowd labels to export",
		Long:    helpLong("demo"),
		Example: helpExample("demo"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cfg.Only != "" && !slices.Contains(demo.Projects, cfg.Only) {
				return cli.Usagef("--only %q: want reports or particles", cfg.Only)
			}
			cfg.Dir, cfg.Source = args[0], cli.Source(cmd)
			cfg.Busy = func(what string) func() {
				bar := cli.Progress(cmd, -1, what)
				return func() { bar.Finish() }
			}
			if err := demo.Run(cfg, cmd.OutOrStdout()); err != nil {
				return err
			}
			cli.Hint(cmd, "\nnext: loop status %s; loop verdict %s --html report.html\n", cfg.Dir, filepath.Join(cfg.Dir, "reports"))
			return nil
		},
	}
	c.Flags().Uint64Var(&cfg.Seed, "seed", 1, "seed of the invented scenario and of every round")
	c.Flags().IntVar(&cfg.Rounds, "rounds", 8, "most rounds per project before giving up on GO")
	c.Flags().StringVar(&cfg.Only, "only", "", "build just one project: reports or particles")
	c.Flags().BoolVar(&cfg.Small, "small", false, "a small scenario, for quick checks")
	return c
}
