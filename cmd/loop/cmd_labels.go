package main

import (
	"github.com/spf13/cobra"

	"handoff"
	"handoff/ingest"
	"handoff/internal/cli"
)

func init() { registerUnder("labels", newLabelsAddCmd) }

func newLabelsAddCmd() *cobra.Command {
	var (
		format      string
		gold        bool
		lopt        ingest.LabelOptions
		sourceField string
		wave        int
	)
	c := &cobra.Command{
		Use:     "add DIR FILE...",
		Short:   "Add crowd labels (or, with --gold, expert answers)",
		Long:    helpLong("labels-add"),
		Example: helpExample("labels-add"),
		Args:    cobra.MinimumNArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cmd.Flags().Changed("wave") {
				if gold {
					return cli.Usagef("--wave is for crowd labels, not --gold answers")
				}
				if wave < 1 || wave > handoff.MaxWave {
					return cli.Usagef("--wave %d: give a wave from 1 to %d", wave, handoff.MaxWave)
				}
			}
			srcs, err := ingest.LabelSources(args[1:], ingest.Format(format))
			if err != nil {
				return cli.SourceUsage(err)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			cb := s.Codebook()
			lopt.Codebook = &cb
			if gold {
				f := cli.ReadFiles(cmd, ingest.GoldFiles(srcs, ingest.GoldOptions{ItemField: lopt.ItemField, LabelField: lopt.LabelField, SourceField: sourceField, Codebook: &cb}))
				defer f.Close()
				res, err := s.ImportGold(cli.Source(cmd), f.Next)
				if err != nil {
					return cli.Located(err, f)
				}
				cli.Out(cmd, "gold: %s from %d file(s)\n", res, len(srcs))
				return nil
			}
			f := cli.ReadFiles(cmd, ingest.LabelFiles(srcs, lopt))
			defer f.Close()
			res, err := s.ImportLabels(cli.Source(cmd), func() (handoff.Label, error) {
				l, err := f.Next()
				l.Wave = wave
				return l, err
			})
			if err != nil {
				return cli.Located(err, f)
			}
			cli.Out(cmd, "labels: %s from %d file(s)\n", res, len(srcs))
			return nil
		},
	}
	f := c.Flags()
	f.StringVar(&format, "format", "", "input format: csv or jsonl (default: guessed from the name)")
	f.BoolVar(&gold, "gold", false, "the files hold gold (expert) answers: item, label, optional source")
	f.StringVar(&lopt.ItemField, "item-field", "item", "field holding the item id")
	f.StringVar(&lopt.AnnotatorField, "annotator-field", "annotator", "field holding the annotator id")
	f.StringVar(&lopt.LabelField, "label-field", "label", "field holding the class key")
	f.StringVar(&lopt.TimeField, "time-field", "time", "field holding when the label was given (RFC 3339)")
	f.StringVar(&lopt.SecondsField, "seconds-field", "seconds", "field holding the seconds spent")
	f.StringVar(&sourceField, "source-field", "source", "with --gold: field naming who gave the answer")
	f.IntVar(&wave, "wave", 0, "the crowd wave the labels belong to (default: the project's open wave)")
	return c
}
