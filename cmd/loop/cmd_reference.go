package main

import (
	"errors"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"handoff"
	"handoff/ingest"
	"handoff/internal/cli"
	"handoff/round"
	"handoff/store"
)

func init() {
	registerUnder("reference", newReferenceAddCmd)
	registerUnder("reference", newReferenceListCmd)
}

func newReferenceAddCmd() *cobra.Command {
	var (
		name    string
		format  string
		replace bool
	)
	c := &cobra.Command{
		Use:     "add DIR FILE --name NAME",
		Short:   "Add an independent (expert) coding to compare the crowd and the machine with",
		Long:    helpLong("reference-add"),
		Example: helpExample("reference-add"),
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := handoff.CheckReferenceName(name); err != nil {
				return cli.Usagef("%v", err)
			}
			path := args[1]
			ff := ingest.Format(format)
			if ff == "" {
				ff = ingest.GuessFormat(path, false)
			}
			if ff != ingest.CSV && ff != ingest.JSONL {
				return cli.Usagef("cannot read a reference from %s: use a .csv or .jsonl file, or --format csv|jsonl", path)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			r, err := os.Open(path)
			if err != nil {
				return err
			}
			ref, locs, err := ingest.ReadReference(r, path, ff, name, s.Codebook())
			r.Close()
			if err != nil {
				return err
			}
			if err := s.PutReference(*ref, replace, cli.Source(cmd)); err != nil {
				var re *handoff.RowError
				if errors.As(err, &re) {
					return ingest.RowAt(locs, re)
				}
				return err
			}
			what := "item labels"
			if ref.Kind() == handoff.ReferenceParents {
				what = "parent scores"
			}
			cli.Out(cmd, "reference %s: %d %s from %s, kept apart from gold (never used for training, cleaning or the verdict)\n", ref.Name, ref.Len(), what, filepath.Base(path))
			cli.Hint(cmd, "next: loop compare %s --reference %s\n", args[0], ref.Name)
			return nil
		},
	}
	f := c.Flags()
	f.StringVar(&name, "name", "", "name of the reference coding (letters, digits, '.', '_', '-'), e.g. experts-2019")
	f.StringVar(&format, "format", "", "input format: csv or jsonl (default: guessed from the name)")
	f.BoolVar(&replace, "replace", false, "replace a reference of the same name")
	return c
}

func newReferenceListCmd() *cobra.Command {
	var asJSON bool
	c := &cobra.Command{
		Use:     "list DIR",
		Short:   "List the project's reference codings",
		Long:    helpLong("reference-list"),
		Example: helpExample("reference-list"),
		Args:    cobra.ExactArgs(1),
		RunE: withStore(func(cmd *cobra.Command, s *store.Store, args []string) error {
			rows, text, err := round.References(s, args[0])
			if err != nil {
				return err
			}
			return cli.Show(cmd, asJSON, rows, text)
		}),
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
