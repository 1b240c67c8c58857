package main

import (
	"fmt"
	"strings"

	"github.com/spf13/cobra"

	"handoff/store"
)

func init() { register(newStatusCmd) }

// statusReport is what `loop status --json` prints: the store's counts, then
// one entry per registered section (consensus, rounds, … as later steps add
// them with registerStatus).
type statusReport struct {
	store.Stats
	Sections map[string]any `json:"sections,omitempty"`
}

func newStatusCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:   "status DIR",
		Short: "Summarise a project: items, labels, annotators, gold",
		Long: `status prints what the project holds: items by kind, how many items have
labels, the labels and annotators, the gold answers, and how many labels each
item has. Later steps (consensus, rounds) add their own sections.`,
		Example: `  loop status proj
  loop status proj --json | jq .labels`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			st, err := s.Stats()
			if err != nil {
				return err
			}
			rep := statusReport{Stats: st}
			var text strings.Builder
			text.WriteString(st.String())
			for _, sec := range statusSections {
				v, t, err := sec.fn(s)
				if err != nil {
					return fmt.Errorf("status %s: %w", sec.name, err)
				}
				if v == nil && t == "" {
					continue
				}
				if rep.Sections == nil {
					rep.Sections = map[string]any{}
				}
				rep.Sections[sec.name] = v
				if t != "" {
					fmt.Fprintf(&text, "%s:\n%s", sec.name, indent(t))
				}
			}
			if asJSON {
				return printJSON(cmd, rep)
			}
			outf(cmd, "%s", text.String())
			return nil
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON instead of text")
	return c
}

func indent(t string) string {
	lines := strings.Split(strings.TrimRight(t, "\n"), "\n")
	for i, l := range lines {
		lines[i] = "  " + l
	}
	return strings.Join(lines, "\n") + "\n"
}
