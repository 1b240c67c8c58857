package main

import (
	"fmt"
	"handoff/internal/cli"
	"handoff/store"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"
)

func init() { register(newWavesCmd) }

func newWavesCmd() *cobra.Command {
	var (
		open   bool
		asJSON bool
	)
	c := &cobra.Command{
		Use:     "waves DIR",
		Short:   "List the crowd waves, or open a new one",
		Long:    helpLong("waves"),
		Example: helpExample("waves"),
		Args:    cobra.ExactArgs(1),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			if open {
				w, err := s.OpenWave(cli.Source(cmd))
				if err != nil {
					return err
				}
				cli.Info(cmd, "wave %d opened: labels added without --wave, and labels sent through the service, now belong to it\n", w)
			}
			ws, err := s.Waves()
			if err != nil {
				return err
			}
			if asJSON {
				return cli.JSON(cmd, ws)
			}
			var b strings.Builder
			tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
			fmt.Fprintln(tw, "wave\tlabels\titems\t")
			for _, w := range ws {
				mark := ""
				if w.Open {
					mark = "open"
				}
				fmt.Fprintf(tw, "%d\t%d\t%d\t%s\n", w.Wave, w.Labels, w.Items, mark)
			}
			tw.Flush()
			cli.Out(cmd, "%s", b.String())
			return nil
		}),
	}
	c.Flags().BoolVar(&open, "open", false, "open the next wave")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
