package main

import (
	"slices"

	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() { register(newStatusCmd) }

func newStatusCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:     "status DIR",
		Short:   "Summarise a project: items, labels, annotators, gold",
		Long:    helpLong("status"),
		Example: helpExample("status"),
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			sections := append(slices.Clone(round.Sections), statusSections...)
			if ws, err := round.WorkspaceProjects(args[0]); err == nil && len(ws) > 0 {
				w, err := round.WorkspaceStatus(args[0], ws, sections, openStore)
				if err != nil {
					return err
				}
				return cli.Show(cmd, asJSON, w, w.Text())
			}
			return onStore(cmd, args[0], "", func(s *store.Store) error {
				st, err := round.ProjectStatus(s, sections)
				if err != nil {
					return err
				}
				return cli.Show(cmd, asJSON, st, st.Text())
			})
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON instead of text")
	return c
}
