package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff/round"
)

func init() { register(newConfigCmd) }

func newConfigCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:   "config DIR [set KEY VALUE]",
		Short: "Show or change the project's settings (max-error, held-out set, batch, learner, …)",
		Long: `config shows the settings the project's rounds use — every key with its value,
where the value comes from (stored in the project or the built-in default), its
range and what it does. ` + "`loop config DIR set KEY VALUE`" + ` changes one, after
checking it against its range, and records the change in the project's audit
trail.

The command line (loop round, next, verdict), the board's "Run a round" button,
the API and the demo all use these stored settings. A flag such as --max-error
overrides one for that run only, and the run's output says so; every report
prints the settings it used.

The held-out set is drawn at the first round as a random share of the archive
(held-out, default 0.1) by a seeded hash of each item's id, but at least
held-out-min items (0: automatic, three times the items a tested threshold
needs at look 10 — 594 at max-error 0.05 and confidence 0.95) and never more
than half the archive. It stays fixed after that.`,
		Example: `  loop config proj
  loop config proj set max-error 0.03
  loop config proj set batch 100
  loop config proj set shares held-out=0.3,reference=0.2,model-unsure=0.5
  loop config proj --json`,
		Args: func(cmd *cobra.Command, args []string) error {
			switch {
			case len(args) == 1:
				return nil
			case len(args) == 4 && args[1] == "set":
				return nil
			case len(args) >= 2 && args[1] == "set":
				return usageErrorf("config DIR set KEY VALUE: give one key and one value (see `loop config DIR` for the keys)")
			}
			return usageErrorf("usage: loop config DIR, or loop config DIR set KEY VALUE")
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			if len(args) == 4 {
				changes, err := round.SetSettings(s, []round.Override{{Key: args[2], Value: args[3]}}, source(cmd))
				if err != nil {
					return settingUsage(err)
				}
				donef(cmd, "%s\n", strings.Join(changes, "\n"))
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
				return printJSON(cmd, out)
			}
			keys := round.Keys()
			var b strings.Builder
			fmt.Fprintf(&b, "settings of %s (change one with `loop config %s set KEY VALUE`)\n", args[0], args[0])
			for i, x := range list {
				fmt.Fprintf(&b, "  %s %s (%s)\n      %s; %s\n", x.Key, x.Value, x.Source, keys[i].Doc, keys[i].Want)
			}
			outf(cmd, "%s", b.String())
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
