package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"handoff/export"
	"handoff/internal/cli"
)

func init() {
	register(newExportCmd)
	register(newRollupCmd)
}

func newExportCmd() *cobra.Command {
	var format, out string
	c := &cobra.Command{
		Use:   "export DIR",
		Short: "Write every item's final label with its provenance",
		Long: `export writes one row per item: the final class and its source — gold (an
expert answer), crowd (the consensus) or machine (an autolabel) — with its
confidence, the consensus posterior, the number of labels, the model version
and round of a machine label, the parent and position, and the covariates.
Items with no answer yet have an empty class and source.`,
		Example: `  loop export proj --format csv --out labels.csv
  loop export proj --format parquet --out labels.parquet
  loop export proj --format jsonl | head`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			switch format {
			case "csv", "jsonl", "parquet":
			default:
				return cli.Usagef("--format %q: want csv, jsonl or parquet", format)
			}
			if format == "parquet" && (out == "" || out == "-") {
				return cli.Usagef("--format parquet needs --out FILE")
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rows, err := export.Rows(s)
			if err != nil {
				return err
			}
			if err := cli.Write(cmd, out, func(w io.Writer) error { cb := s.Codebook(); return export.Write(w, format, rows, cb.Keys()) }); err != nil {
				return err
			}
			if out != "" && out != "-" {
				by := map[string]int{}
				for _, r := range rows {
					src := r.Source
					if src == "" {
						src = "none yet"
					}
					by[src]++
				}
				cli.Info(cmd, "exported %d items to %s (gold %d, crowd %d, machine %d, none yet %d)\n",
					len(rows), out, by["gold"], by["crowd"], by["machine"], by["none yet"])
				return s.Record(cli.Source(cmd), "export", fmt.Sprintf("%d rows as %s to %s", len(rows), format, out))
			}
			return nil
		},
	}
	c.Flags().StringVar(&format, "format", "csv", "csv, jsonl or parquet")
	c.Flags().StringVarP(&out, "out", "o", "", "output file (default: standard output)")
	return c
}

func newRollupCmd() *cobra.Command {
	var (
		by     string
		cfg    export.RollupConfig
		asJSON bool
	)
	c := &cobra.Command{
		Use:   "rollup DIR --by parent",
		Short: "Roll item labels up to their parents, with exact intervals",
		Long: `rollup gives, for each parent (the document or source items were split
from), the share of each class among its items' final labels and, for an
ordinal codebook, the mean position (1 = lowest class), each with an exact
95% Clopper–Pearson interval (for the position, on its fractional count; see
export.Rollup), the parent's items taken as a sample of its items.`,
		Example: `  loop rollup proj --by parent
  loop rollup proj --by parent --json > shares.json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if by != "parent" {
				return cli.Usagef("--by %q: only parent is supported", by)
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rows, err := export.Rows(s)
			if err != nil {
				return err
			}
			cb := s.Codebook()
			ps, err := export.Rollup(rows, cb.Keys(), cb.IsOrdinal(), cfg)
			if err != nil {
				return err
			}
			if asJSON {
				return cli.JSON(cmd, ps)
			}
			cli.Out(cmd, "%s", export.RollupText(ps, cb.Keys(), cb.IsOrdinal()))
			return nil
		},
	}
	c.Flags().StringVar(&by, "by", "parent", "what to roll up by (parent)")
	c.Flags().IntVar(&cfg.Reps, "reps", 1000, "unused: the intervals are exact (kept so that older scripts run)")
	c.Flags().Uint64Var(&cfg.Seed, "seed", 1, "unused: the intervals are exact (kept so that older scripts run)")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}
