package main

import (
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"handoff/ingest"
	"handoff/store"
)

func init() { registerUnder("codebook", newAddQuestionCmd) }

func newAddQuestionCmd() *cobra.Command {
	return &cobra.Command{
		Use:   "add-question DIR FILE",
		Short: "Add a follow-up question to a project's codebook",
		Long: `add-question adds one follow-up question, read from FILE (YAML or JSON, the
fields of an entry of a codebook's questions: key, question, scale, classes,
instructions and, for a conditional question, when: {question: KEY, in:
[CLASS, …]}), to the project's codebook. The whole new codebook is checked
first (unknown question or class in the condition, a cycle, a key already
used); nothing already stored changes: labels, consensus and models stay as
they are, and the new question's labels can be added from then on.
Restart a running ` + "`loop serve`" + ` afterwards so that it takes the new question.`,
		Example: `  cat > severity.yaml <<'END'
  key: severity
  question: How severe is it?
  scale: ordinal
  classes: [{key: "1"}, {key: "2"}, {key: "3"}]
  when: {question: topic, in: [pollution]}
  END
  loop codebook add-question proj severity.yaml`,
		Args: cobra.ExactArgs(2),
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
				cb, err := s.AddQuestion(q, source(cmd))
				if err != nil {
					return err
				}
				var keys []string
				for _, x := range cb.All() {
					keys = append(keys, x.Key)
				}
				donef(cmd, "added question %q (%d classes); the codebook's questions: %s\n", q.Key, len(q.Classes), strings.Join(keys, ", "))
				return nil
			})
		},
	}
}
