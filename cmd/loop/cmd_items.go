package main

import (
	"strings"

	"github.com/spf13/cobra"

	"handoff/ingest"
	"handoff/internal/cli"
)

func init() { registerUnder("items", newItemsAddCmd) }

func newItemsAddCmd() *cobra.Command {
	var (
		format     string
		opt        ingest.ItemOptions
		covariates string
		split      string
		update     bool
	)
	c := &cobra.Command{
		Use:     "add DIR FILE...",
		Short:   "Add text items (CSV, JSONL) or images (folder, list of paths)",
		Long:    helpLong("items-add"),
		Example: helpExample("items-add"),
		Args:    cobra.MinimumNArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			switch split {
			case "":
			case "sentences":
				opt.SplitSentences = true
			default:
				return cli.Usagef("--split %q: the only split is \"sentences\"", split)
			}
			if cmd.Flags().Changed("covariates") {
				opt.Covariates = []string{}
				for _, c := range strings.Split(covariates, ",") {
					if c = strings.TrimSpace(c); c != "" && c != "none" {
						opt.Covariates = append(opt.Covariates, c)
					}
				}
			}
			srcs, err := ingest.ItemSources(args[1:], ingest.Format(format), opt.SplitSentences)
			if err != nil {
				return cli.SourceUsage(err)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			f := cli.ReadFiles(cmd, ingest.ItemFiles(srcs, opt))
			defer f.Close()
			res, err := s.ImportItems(cli.Source(cmd), update, f.Next)
			if err != nil {
				return cli.Located(err, f)
			}
			cli.Out(cmd, "items: %s from %d file(s)\n", res, len(srcs))
			return nil
		},
	}
	f := c.Flags()
	f.StringVar(&format, "format", "", "input format: csv, jsonl or images (default: guessed from the name)")
	f.StringVar(&opt.IDField, "id-field", "id", "field holding the item id")
	f.StringVar(&opt.TextField, "text-field", "text", "field holding the text")
	f.StringVar(&opt.ParentField, "parent-field", "parent", "field holding the parent (document or source) id")
	f.StringVar(&covariates, "covariates", "", "comma-separated fields to keep as covariates (default: all other fields; \"none\" for none)")
	f.StringVar(&split, "split", "", "split each text into items: \"sentences\" (UAX #29 sentence boundaries)")
	f.BoolVar(&update, "update", false, "replace items whose id is already in the project instead of refusing them")
	return c
}
