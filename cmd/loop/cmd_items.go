package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"

	"handoff"
	"handoff/ingest"
	"handoff/store"
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
			srcs := make([]itemSource, 0, len(args)-1)
			for _, f := range args[1:] {
				fi, err := os.Stat(f)
				if err != nil {
					return err
				}
				ff := ingest.Format(format)
				if ff == "" {
					ff = ingest.GuessFormat(f, fi.IsDir())
				}
				switch ff {
				case ingest.CSV, ingest.JSONL, ingest.Images:
				case "":
					return usageErrorf("cannot tell the format of %s from its name; use --format csv|jsonl|images", f)
				default:
					return usageErrorf("--format %q: want csv, jsonl or images", format)
				}
				if fi.IsDir() && ff != ingest.Images {
					return usageErrorf("%s is a folder; only --format images reads folders", f)
				}
				if ff == ingest.Images && opt.SplitSentences {
					return usageErrorf("--split applies to text, not images (%s)", f)
				}
				srcs = append(srcs, itemSource{path: f, format: ff})
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			m := &multiItems{cmd: cmd, srcs: srcs, opt: opt}
			defer m.close()
			res, err := s.ImportItems(source(cmd), update, m.next)
			if err != nil {
				return m.locate(err)
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

type itemSource struct {
	path   string
	format ingest.Format
}

// multiItems chains the item readers of several files into one stream for
// one store transaction, with a progress bar per file.
type multiItems struct {
	cmd  *cobra.Command
	srcs []itemSource
	opt  ingest.ItemOptions

	i     int
	file  io.Closer
	bar   *progressbar.ProgressBar
	count bool // bar counts items rather than bytes
	next1 func() (handoff.Item, error)
	where func() ingest.Location
}

func (m *multiItems) close() {
	if m.file != nil {
		m.file.Close()
		m.file = nil
	}
	if m.bar != nil {
		m.bar.Finish()
		m.bar = nil
	}
}

func (m *multiItems) open(src itemSource) error {
	desc := filepath.Base(src.path)
	if src.format == ingest.Images {
		if fi, err := os.Stat(src.path); err == nil && fi.IsDir() {
			ir, err := ingest.NewImageFolder(src.path)
			if err != nil {
				return err
			}
			m.bar = newProgress(m.cmd, int64(ir.Len()), desc)
			m.count = true
			m.next1, m.where = ir.Next, ir.Where
			return nil
		}
	}
	r, bar, err := progressFile(m.cmd, src.path, desc)
	if err != nil {
		return err
	}
	m.file, m.bar, m.count = r, bar, false
	if src.format == ingest.Images {
		if tf := ingest.GuessFormat(src.path, false); tf == ingest.CSV || tf == ingest.JSONL {
			ir, err := ingest.NewImageTable(r, src.path, tf, filepath.Dir(src.path), m.opt)
			if err != nil {
				return err
			}
			m.next1, m.where = ir.Next, ir.Where
			return nil
		}
		ir := ingest.NewImageList(r, src.path, filepath.Dir(src.path))
		m.next1, m.where = ir.Next, ir.Where
		return nil
	}
	ir, err := ingest.NewItemReader(r, src.path, src.format, m.opt)
	if err != nil {
		return err
	}
	m.next1, m.where = ir.Next, ir.Where
	return nil
}

func (m *multiItems) next() (handoff.Item, error) {
	for {
		if m.next1 == nil {
			if m.i >= len(m.srcs) {
				return handoff.Item{}, io.EOF
			}
			m.where = nil
			if err := m.open(m.srcs[m.i]); err != nil {
				return handoff.Item{}, err
			}
			m.i++
		}
		it, err := m.next1()
		if err == io.EOF {
			m.close()
			m.next1 = nil
			continue
		}
		if err == nil && m.count {
			m.bar.Add(1)
		}
		return it, err
	}
}

// locate adds the file and line of the record being read to a store data
// error.
func (m *multiItems) locate(err error) error {
	return locate(err, m.where)
}

func locate(err error, where func() ingest.Location) error {
	var de *store.DataError
	if errors.As(err, &de) && where != nil {
		return ingest.At(where(), de.Field, de.Err)
	}
	var ie *ingest.Error
	if errors.As(err, &ie) {
		return err
	}
	if de != nil {
		return fmt.Errorf("%v", de)
	}
	return err
}
