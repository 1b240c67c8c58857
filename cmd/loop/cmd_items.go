package main

import (
	"strings"

	"github.com/spf13/cobra"

	"handoff/ingest"
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
		Use:   "add DIR FILE...",
		Short: "Add text items (CSV, JSONL) or images (folder, list of paths)",
		Long: `add reads items from each FILE and writes them all in one transaction: if any
record is bad, nothing is added and the error names the file, line and field.

Text files are CSV (with a header row) or JSONL (one object per line). The
fields "id" and "text" are required, "parent" and "position" are optional,
and every other field becomes a covariate (metadata used later for debiasing
and reports) unless --covariates lists which to keep. With --split sentences
each record is a document that is cut into sentence items "ID#0", "ID#1", …
whose parent is the document id.

Images are a folder (walked recursively; .png, .jpg, .jpeg, .gif), a text
file listing image paths one per line, or — with --format images — a CSV or
JSONL file with a "path" field (relative to the file's folder), an optional
"id" (default: the path), "parent", "position" and covariates such as the
magnification. Each image is decoded once to refuse broken files; it stays
where it is and the item records its absolute path and SHA-256.

The format is guessed from the name (.csv, .jsonl/.ndjson/.json, a folder or
.txt/.list for images) unless --format says.`,
		Example: `  loop items add proj reports.csv
  loop items add proj reports.jsonl --split sentences --covariates site,year
  loop items add proj docs.csv --id-field doc_id --text-field body
  loop items add proj photos/                 # every image under photos/
  loop items add proj --format images slides.csv   # path,magnification,…
  loop items add proj fixed.csv --update      # replace items with the same id`,
		Args: cobra.MinimumNArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			switch split {
			case "":
			case "sentences":
				opt.SplitSentences = true
			default:
				return usageErrorf("--split %q: the only split is \"sentences\"", split)
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
				return sourceUsage(err)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			f := readFiles(cmd, ingest.ItemFiles(srcs, opt))
			defer f.Close()
			res, err := s.ImportItems(source(cmd), update, f.Next)
			if err != nil {
				return located(err, f)
			}
			outf(cmd, "items: %s from %d file(s)\n", res, len(srcs))
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
