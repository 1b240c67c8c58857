package main

import (
	"github.com/spf13/cobra"

	"handoff/ingest"
	"handoff/store"
)

func init() { register(newInitCmd) }

func newInitCmd() *cobra.Command {
	var codebook string
	c := &cobra.Command{
		Use:   "init DIR --codebook FILE",
		Short: "Make a new project in DIR with a codebook",
		Long: `init creates DIR (if needed) and the project file DIR/handoff.db, with the
codebook read from FILE (YAML or JSON). The codebook needs a question and
2 to 255 classes with unique keys; "scale: ordinal" means the classes are
listed lowest first. In YAML, put a value that holds commas or a colon in
quotes when it sits inside {…}.`,
		Example: `  cat > codebook.yaml <<'END'
  name: topic
  question: What is this report mainly about?
  classes:
    - {key: pollution, name: Pollution, description: "oil, foam, discoloured water"}
    - {key: wildlife, name: Wildlife}
    - {key: other, name: Other}
  END
  loop init proj --codebook codebook.yaml`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if codebook == "" {
				return usageErrorf("init needs --codebook FILE")
			}
			cb, err := ingest.ReadCodebook(codebook)
			if err != nil {
				return err
			}
			s, err := store.Create(args[0], cb, source(cmd))
			if err != nil {
				return err
			}
			defer s.Close()
			donef(cmd, "created project %s with codebook %q (%d classes)\n", args[0], cb.Name, len(cb.Classes))
			return nil
		},
	}
	c.Flags().StringVar(&codebook, "codebook", "", "codebook file, YAML or JSON (required)")
	return c
}
