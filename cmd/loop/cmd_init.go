package main

import (
	"github.com/spf13/cobra"

	"handoff/ingest"
	"handoff/internal/cli"
	"handoff/store"
)

func init() { register(newInitCmd) }

func newInitCmd() *cobra.Command {
	var codebook string
	c := &cobra.Command{
		Use:     "init DIR --codebook FILE",
		Short:   "Make a new project in DIR with a codebook",
		Long:    helpLong("init"),
		Example: helpExample("init"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if codebook == "" {
				return cli.Usagef("init needs --codebook FILE")
			}
			cb, err := ingest.ReadCodebook(codebook)
			if err != nil {
				return err
			}
			s, err := store.Create(args[0], cb, cli.Source(cmd))
			if err != nil {
				return err
			}
			defer s.Close()
			cli.Done(cmd, "created project %s with codebook %q (%d classes)\n", args[0], cb.Name, len(cb.Classes))
			return nil
		},
	}
	c.Flags().StringVar(&codebook, "codebook", "", "codebook file, YAML or JSON (required)")
	return c
}
