package main

import (
	"fmt"
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
		Use:   "waves DIR",
		Short: "List the crowd waves, or open a new one",
		Long: `waves lists the project's crowd waves — runs of the crowd over the same
items, to measure test–retest reliability (loop compare) — with their labels
and items, and which wave is open: the one new labels get when added without
--wave, and the one labels sent through the service (loop serve) get.

With --open, the next wave is opened (one past the highest wave any label
has): from then on labels added without --wave, and labels people send
through the service, belong to it, and a person may label again an item they
labelled in an earlier wave. The round's consensus uses the labels of every
wave; loop compare computes each wave's consensus apart.`,
		Example: `  loop waves proj
  loop waves proj --open`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			if open {
				w, err := s.OpenWave(source(cmd))
				if err != nil {
					return err
				}
				infof(cmd, "wave %d opened: labels added without --wave, and labels sent through the service, now belong to it\n", w)
			}
			ws, err := s.Waves()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, ws)
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
			outf(cmd, "%s", b.String())
			return nil
		},
	}
	c.Flags().BoolVar(&open, "open", false, "open the next wave")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
