package main

import (
	"io"
	"path/filepath"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"handoff"
	"handoff/ingest"
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
		Use:   "add DIR FILE...",
		Short: "Add crowd labels (or, with --gold, expert answers)",
		Long: `add reads labels in long format — one label per row — from each FILE (CSV with
a header row, or JSONL) and writes them all in one transaction: if any row is
bad, nothing is added and the error names the file, line and field.

Crowd label fields: item, annotator, label (a class key of the codebook), and
optionally time (RFC 3339, e.g. 2024-05-01T14:03:00Z) and seconds (time spent).
Every item must already be in the project. Repeated labels by one annotator
for one item are all kept; cleaning rules decide later.

With --wave N the labels belong to crowd wave N (a later run of the crowd
over the same items, for test–retest reliability; see loop compare and loop
waves); without it they belong to the project's open wave (1 unless a new
wave was opened).

With --gold the fields are item, label and optionally source (who gave the
answer; default the file name). Gold for an item that has gold replaces it.`,
		Example: `  loop labels add proj labels.csv
  loop labels add proj round2.jsonl --annotator-field worker
  loop labels add proj retest.csv --wave 2
  loop labels add proj expert.csv --gold`,
		Args: cobra.MinimumNArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			if cmd.Flags().Changed("wave") && (gold || wave < 1 || wave > handoff.MaxWave) {
				if gold {
					return usageErrorf("--wave is for crowd labels, not --gold answers")
				}
				return usageErrorf("--wave %d: give a wave from 1 to %d", wave, handoff.MaxWave)
			}
			formats := make([]ingest.Format, 0, len(args)-1)
			for _, f := range args[1:] {
				ff := ingest.Format(format)
				if ff == "" {
					ff = ingest.GuessFormat(f, false)
				}
				if ff != ingest.CSV && ff != ingest.JSONL {
					return usageErrorf("cannot read labels from %s: use a .csv or .jsonl file, or --format csv|jsonl", f)
				}
				formats = append(formats, ff)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			cb := s.Codebook()
			lopt.Codebook = &cb
			gopt := ingest.GoldOptions{ItemField: lopt.ItemField, LabelField: lopt.LabelField, SourceField: sourceField, Codebook: &cb}

			var (
				i     int
				file  io.ReadCloser
				bar   *progressbar.ProgressBar
				where func() ingest.Location
			)
			closeFile := func() {
				if file != nil {
					file.Close()
					bar.Finish()
					file = nil
				}
			}
			defer closeFile()
			// open opens the next file and returns its reader's Next as any
			// of the two label kinds.
			open := func() (func() (handoff.Label, error), func() (handoff.Gold, error), error) {
				path := args[1+i]
				r, b, err := progressFile(cmd, path, filepath.Base(path))
				if err != nil {
					return nil, nil, err
				}
				file, bar = r, b
				if gold {
					gr, err := ingest.NewGoldReader(r, path, formats[i], gopt)
					if err != nil {
						return nil, nil, err
					}
					where = gr.Where
					return nil, gr.Next, nil
				}
				lr, err := ingest.NewLabelReader(r, path, formats[i], lopt)
				if err != nil {
					return nil, nil, err
				}
				where = lr.Where
				return lr.Next, nil, nil
			}
			var (
				nextL func() (handoff.Label, error)
				nextG func() (handoff.Gold, error)
			)
			advance := func() (bool, error) {
				closeFile()
				if i >= len(formats) {
					return false, nil
				}
				var err error
				where = nil
				nextL, nextG, err = open()
				i++
				return err == nil, err
			}
			if gold {
				res, err := s.ImportGold(source(cmd), func() (handoff.Gold, error) {
					for {
						if nextG == nil {
							if ok, err := advance(); !ok {
								if err == nil {
									err = io.EOF
								}
								return handoff.Gold{}, err
							}
						}
						g, err := nextG()
						if err == io.EOF {
							nextG = nil
							continue
						}
						return g, err
					}
				})
				if err != nil {
					return locate(err, where)
				}
				outf(cmd, "gold: %s from %d file(s)\n", res, len(formats))
				return nil
			}
			res, err := s.ImportLabels(source(cmd), func() (handoff.Label, error) {
				for {
					if nextL == nil {
						if ok, err := advance(); !ok {
							if err == nil {
								err = io.EOF
							}
							return handoff.Label{}, err
						}
					}
					l, err := nextL()
					if err == io.EOF {
						nextL = nil
						continue
					}
					l.Wave = wave
					return l, err
				}
			})
			if err != nil {
				return locate(err, where)
			}
			outf(cmd, "labels: %s from %d file(s)\n", res, len(formats))
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
