package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() { register(newConfigCmd) }

func newConfigCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:     "config DIR [set KEY VALUE]",
		Short:   "Show or change the project's settings (max-error, held-out set, batch, learner, …)",
		Long:    helpLong("config"),
		Example: helpExample("config"),
		Args: func(cmd *cobra.Command, args []string) error {
			switch {
			case len(args) == 1:
				return nil
			case len(args) == 4 && args[1] == "set":
				return nil
			case len(args) >= 2 && args[1] == "set":
				return cli.Usagef("config DIR set KEY VALUE: give one key and one value (see `loop config DIR` for the keys)")
			}
			return cli.Usagef("usage: loop config DIR, or loop config DIR set KEY VALUE")
		},
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			if len(args) == 4 {
				changes, err := round.SetSettings(s, []round.Override{{Key: args[2], Value: args[3]}}, cli.Source(cmd))
				if err != nil {
					return cli.SettingUsage(err)
				}
				cli.Done(cmd, "%s\n", strings.Join(changes, "\n"))
				return nil
			}
			_, list, err := round.Settings(s)
			if err != nil {
				return err
			}
			if asJSON {
				type row struct {
					Key    string `json:"key"`
					Value  string `json:"value"`
					Source string `json:"source"`
					Range  string `json:"range"`
					Doc    string `json:"doc"`
				}
				keys := round.Keys()
				out := make([]row, len(list))
				for i, x := range list {
					out[i] = row{x.Key, x.Value, x.Source, keys[i].Want, keys[i].Doc}
				}
				return cli.JSON(cmd, out)
			}
			keys := round.Keys()
			var b strings.Builder
			fmt.Fprintf(&b, "settings of %s (change one with `loop config %s set KEY VALUE`)\n", args[0], args[0])
			for i, x := range list {
				fmt.Fprintf(&b, "  %s %s (%s)\n      %s; %s\n", x.Key, x.Value, x.Source, keys[i].Doc, keys[i].Want)
			}
			cli.Out(cmd, "%s", b.String())
			return nil
		}),
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
