package main

import (
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"handoff/ingest"
	"handoff/internal/cli"
	"handoff/store"
)

func init() { registerUnder("codebook", newAddQuestionCmd) }

func newAddQuestionCmd() *cobra.Command {
	return &cobra.Command{
		Use:     "add-question DIR FILE",
		Short:   "Add a follow-up question to a project's codebook",
		Long:    helpLong("codebook-add-question"),
		Example: helpExample("codebook-add-question"),
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			data, err := os.ReadFile(args[1])
			if err != nil {
				return err
			}
			return onStore(cmd, args[0], "", func(s *store.Store) error {
				q, err := ingest.ParseQuestion(s.Codebook(), filepath.Base(args[1]), data)
				if err != nil {
					return err
				}
				cb, err := s.AddQuestion(q, cli.Source(cmd))
				if err != nil {
					return err
				}
				var keys []string
				for _, x := range cb.All() {
					keys = append(keys, x.Key)
				}
				cli.Done(cmd, "added question %q (%d classes); the codebook's questions: %s\n", q.Key, len(q.Classes), strings.Join(keys, ", "))
				return nil
			})
		},
	}
}
