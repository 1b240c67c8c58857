package main

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"handoff"
	"handoff/learner"
	"handoff/round"
	"handoff/selector"
	"handoff/store"
	"handoff/verdict"
)

func init() {
	register(newTrainCmd)
	register(newRoundCmd)
	register(newNextCmd)
	register(newVerdictCmd)
	register(newAutolabelCmd)
	register(newModelCmd)
	registerStatus("rounds", roundStatus)
}

// trainFlags binds the training options.
func trainFlags(c *cobra.Command, t *round.TrainConfig, kind *string) {
	fl := c.Flags()
	fl.StringVar(&t.Learner, "learner", "", "logistic, bayes or forest (default: logistic for text, forest for images)")
	fl.StringVar(kind, "features", "", "text or image (default: the kind most items have)")
	fl.Float64Var(&t.Lambda, "lambda", 0.1, "logistic regression's L2 penalty λ = 1/C")
	fl.IntVar(&t.Folds, "folds", 5, "cross-validation folds (items of one parent stay together)")
}

func parseKind(s string) (handoff.Kind, error) {
	switch s {
	case "":
		return "", nil
	case "text":
		return handoff.KindText, nil
	case "image":
		return handoff.KindImage, nil
	}
	return "", usageErrorf("--features %q: want text or image", s)
}

func newTrainCmd() *cobra.Command {
	var (
		cfg    round.TrainConfig
		kind   string
		asJSON bool
	)
	c := &cobra.Command{
		Use:   "train DIR",
		Short: "Train the machine on the stored consensus",
		Long: `train fits a classifier on the consensus of every crowd-labelled item (the
held-out set excepted), with the consensus posterior as soft targets so that
items the crowd is unsure of count less. It prints k-fold cross-validated
accuracy, macro-F1 and the expected calibration error before and after
temperature scaling, and stores the model.`,
		Example: `  loop consensus proj && loop train proj
  loop train proj --learner bayes
  loop train proj --features image --learner forest --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			k, err := parseKind(kind)
			if err != nil {
				return err
			}
			cfg.Kind = k
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			bar := newProgress(cmd, -1, "training")
			r, err := round.Train(s, cfg, source(cmd))
			bar.Finish()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, r)
			}
			outf(cmd, "%s", trainText(r))
			return nil
		},
	}
	trainFlags(c, &cfg, &kind)
	c.Flags().Uint64Var(&cfg.Seed, "seed", 1, "seed for the folds")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

func trainText(r *round.TrainReport) string {
	var b strings.Builder
	fmt.Fprintf(&b, "model %s: %s on %s features, %d items, %d features\n", r.Version, r.Learner, r.Kind, r.Rows, r.Columns)
	fmt.Fprintf(&b, "  %d-fold cross-validation%s: accuracy %.3f, macro-F1 %.3f\n", r.CV.Folds, map[bool]string{true: " (parents kept together)"}[r.CV.Grouped], r.CV.Accuracy, r.CV.MacroF1)
	fmt.Fprintf(&b, "  calibration error (ECE, 15 bins): %.3f before, %.3f after temperature scaling (T = %.3g)\n", r.CV.ECEBefore, r.CV.ECEAfter, r.Temperature)
	if len(r.Missing) > 0 {
		fmt.Fprintf(&b, "  classes with no training example (never predicted): %s\n", strings.Join(r.Missing, ", "))
	}
	if r.Skipped > 0 {
		fmt.Fprintf(&b, "  %d labelled items of another kind were left out\n", r.Skipped)
	}
	return b.String()
}

// roundFlags binds a round's options.
type roundFlags struct {
	cfg       round.Config
	kind      string
	strategy  string
	diversity string
	clean     cleaningFlags
}

func (f *roundFlags) bind(c *cobra.Command) {
	f.cfg = round.DefaultConfig()
	fl := c.Flags()
	trainFlags(c, &f.cfg.Train, &f.kind)
	fl.StringVar(&f.cfg.Consensus.Method, "method", "dawid-skene", "combining method: majority, dawid-skene or one-coin")
	fl.StringVar(&f.cfg.Consensus.Debias, "debias", "", "correct a bias shared by everyone that depends on this covariate")
	fl.StringVar(&f.cfg.Consensus.Reference, "reference-stratum", "", "the covariate value taken as unbiased when there is no gold")
	fl.IntVar(&f.cfg.Batch, "n", 200, "size of the next batch")
	fl.StringVar(&f.strategy, "strategy", "entropy", "model-unsure score: entropy, margin, least-confidence or committee")
	fl.StringVar(&f.diversity, "diversity", "", "spread model-unsure picks: cosine or euclidean (default: off)")
	fl.Float64Var(&f.cfg.HeldOutShare, "held-out", 0.1, "share of labelled items reserved for the verdict at the first round")
	fl.Float64Var(&f.cfg.Verdict.MaxError, "max-error", 0.05, "largest acceptable disagreement among autolabelled items")
	fl.Float64Var(&f.cfg.Verdict.Confidence, "confidence", 0.95, "confidence level of the error bound")
	fl.Uint64Var(&f.cfg.Seed, "seed", 1, "seed of every random choice")
	f.clean.bind(c)
}

func (f *roundFlags) config() (round.Config, error) {
	cfg := f.cfg
	k, err := parseKind(f.kind)
	if err != nil {
		return cfg, err
	}
	cfg.Train.Kind = k
	st, err := selector.ParseStrategy(f.strategy)
	if err != nil {
		return cfg, usageErrorf("--strategy: %v", err)
	}
	cfg.Strategy = st
	switch f.diversity {
	case "":
	case "cosine", "euclidean":
		cfg.Diversity = selector.Metric(f.diversity)
	default:
		return cfg, usageErrorf("--diversity %q: want cosine or euclidean", f.diversity)
	}
	cfg.Consensus.Rules = f.clean.rules()
	cfg.Consensus.NoCleaning = f.clean.noCleaning
	return cfg, nil
}

func newRoundCmd() *cobra.Command {
	var (
		f      roundFlags
		asJSON bool
	)
	c := &cobra.Command{
		Use:   "round DIR",
		Short: "Run one round: consensus → train → score → next batch → verdict",
		Long: `round runs the whole loop once: it cleans and combines the crowd labels,
reserves (or tops up) the held-out set, trains the machine on the rest,
scores the unlabelled items, picks the next batch for people (each item with
its reason) and reaches a verdict on the held-out set. Everything is stored as
a numbered round; the same store and seed give the same results.`,
		Example: `  loop round proj
  loop round proj --n 300 --strategy margin --max-error 0.03
  loop round particles --debias magnification --reference-stratum 40`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			cfg, err := f.config()
			if err != nil {
				return err
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			bar := newProgress(cmd, -1, "round")
			r, err := round.Run(s, cfg, source(cmd))
			bar.Finish()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, r)
			}
			outf(cmd, "round %d: model %s\n", r.Round, r.Model)
			outf(cmd, "%s", indent(consensusText(r.Consensus, false)))
			outf(cmd, "%s", indent(trainText(r.Train)))
			outf(cmd, "  next batch: %d items (%s); write it with `loop next %s`\n", len(r.Batch), reasonCounts(r.Batch), args[0])
			outf(cmd, "verdict: %s\n", r.Verdict.Headline())
			return nil
		},
	}
	f.bind(c)
	c.Flags().BoolVar(&asJSON, "json", false, "print the round as JSON")
	return c
}

func reasonCounts(b []round.BatchItem) string {
	n := map[string]int{}
	var order []string
	for _, x := range b {
		if n[x.Reason] == 0 {
			order = append(order, x.Reason)
		}
		n[x.Reason]++
	}
	var parts []string
	for _, r := range order {
		parts = append(parts, fmt.Sprintf("%s %d", r, n[r]))
	}
	return strings.Join(parts, ", ")
}

func newNextCmd() *cobra.Command {
	var (
		cfg              round.NextConfig
		strategy, format string
		out, diversity   string
		shares           string
	)
	c := &cobra.Command{
		Use:   "next DIR",
		Short: "Write the next batch of items for people, each with its reason",
		Long: `next picks the items people should label next with the latest round's
model and writes them as CSV or JSONL, ready for any crowd platform or the
built-in labelling page. Each item carries its reason: model-unsure (the model
is least sure), crowd-split (the crowd still disagrees: more labels),
conflict (a confident crowd the model disputes: expert review), held-out
(a random top-up of the held-out set) or audit (a random machine-labelled
item, with --audit N, to measure the real error after handoff).`,
		Example: `  loop next proj --n 200 --out batch.csv
  loop next proj --n 100 --strategy margin --diversity cosine --format jsonl
  loop next proj --audit 150 --out audit.csv
  loop next proj --below-threshold --out people.csv`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if format != "csv" && format != "jsonl" {
				return usageErrorf("--format %q: want csv or jsonl", format)
			}
			if strategy != "" {
				st, err := selector.ParseStrategy(strategy)
				if err != nil {
					return usageErrorf("--strategy: %v", err)
				}
				cfg.Strategy = st
			}
			switch diversity {
			case "":
			case "cosine", "euclidean":
				cfg.Diversity = selector.Metric(diversity)
			default:
				return usageErrorf("--diversity %q: want cosine or euclidean", diversity)
			}
			if shares != "" {
				cfg.Shares = map[selector.Reason]float64{}
				for _, kv := range strings.Split(shares, ",") {
					k, v, ok := strings.Cut(kv, "=")
					x, err := strconv.ParseFloat(v, 64)
					if !ok || err != nil {
						return usageErrorf("--shares %q: want reason=share,… e.g. model-unsure=0.7,held-out=0.3", shares)
					}
					cfg.Shares[selector.Reason(strings.TrimSpace(k))] = x
				}
			}
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			b, err := round.Next(s, cfg, source(cmd))
			if err != nil {
				return err
			}
			w, done, err := openOutput(cmd, out)
			if err != nil {
				return err
			}
			err = writeBatch(w, format, b)
			if derr := done(err == nil); err == nil {
				err = derr
			}
			if err != nil {
				return err
			}
			if out != "" && out != "-" {
				infof(cmd, "wrote %d items to %s (%s)\n", len(b), out, reasonCounts(b))
			}
			return nil
		},
	}
	fl := c.Flags()
	fl.IntVar(&cfg.N, "n", 200, "batch size")
	fl.StringVar(&strategy, "strategy", "", "entropy, margin, least-confidence or committee (default: the round's)")
	fl.StringVar(&diversity, "diversity", "", "spread model-unsure picks: cosine or euclidean")
	fl.Float64Var(&cfg.Beta, "density", 0, "weight model-unsure scores by information density to this power (0: off)")
	fl.BoolVar(&cfg.Balanced, "balanced", false, "spread model-unsure picks over the predicted classes")
	fl.StringVar(&shares, "shares", "", "split over reasons, e.g. model-unsure=0.6,held-out=0.2,crowd-split=0.1,conflict=0.1")
	fl.IntVar(&cfg.Audit, "audit", 0, "instead: this many random machine-labelled items to audit")
	fl.BoolVar(&cfg.BelowThreshold, "below-threshold", false, "instead: the items autolabel left for people")
	fl.Uint64Var(&cfg.Seed, "seed", 0, "seed (default: the round's)")
	fl.StringVar(&format, "format", "csv", "csv or jsonl")
	fl.StringVarP(&out, "out", "o", "", "output file (default: standard output)")
	return c
}

func writeBatch(w io.Writer, format string, b []round.BatchItem) error {
	if format == "jsonl" {
		enc := json.NewEncoder(w)
		for i := range b {
			if err := enc.Encode(&b[i]); err != nil {
				return err
			}
		}
		return nil
	}
	cw := csv.NewWriter(w)
	cw.Write([]string{"item", "reason", "score", "kind", "text", "path", "parent", "machine", "crowd"})
	for _, x := range b {
		cw.Write(round.SafeCells([]string{x.Item, x.Reason, strconv.FormatFloat(x.Score, 'g', 6, 64), x.Kind, x.Text, x.Path, x.Parent, x.Machine, x.Crowd}))
	}
	cw.Flush()
	return cw.Error()
}

func newVerdictCmd() *cobra.Command {
	var (
		asJSON    bool
		html      string
		maxErr    float64
		conf      float64
		requireCe bool
		requireSt bool
	)
	c := &cobra.Command{
		Use:   "verdict DIR",
		Short: "Is the machine good enough to take over? The handoff report",
		Long: `verdict reports, on the held-out set of the latest round: accuracy, Cohen's
kappa and macro-F1 of machine against crowd with bootstrap intervals; the crowd
ceiling (each annotator's kappa against the leave-one-out consensus) and
whether the machine is as good as the median annotator; the coverage–risk
curve with Clopper–Pearson upper bounds and the threshold chosen by
fixed-sequence testing, so the bound holds without another split; calibration;
the stopping rule; the learning curve with the labels still needed; and, after
an audit, the real error of machine labels. It ends with GO (threshold,
coverage, bound) or NOT YET (why).

With --max-error or --confidence different from the round's, the verdict is
recomputed from the stored round.`,
		Example: `  loop verdict proj
  loop verdict proj --max-error 0.03 --confidence 0.99
  loop verdict proj --html report.html
  loop verdict proj --json | jq .decision`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			rep, err := round.Verdict(s, round.VerdictConfig{MaxError: maxErr, Confidence: conf, RequireCeiling: requireCe, RequireStable: requireSt})
			if err != nil {
				return err
			}
			if html != "" {
				w, done, err := openOutput(cmd, html)
				if err != nil {
					return err
				}
				err = rep.WriteHTML(w, "Handoff verdict — "+args[0])
				if derr := done(err == nil); err == nil {
					err = derr
				}
				if err != nil {
					return err
				}
				infof(cmd, "report written to %s\n", html)
			}
			if asJSON {
				return rep.WriteJSON(cmd.OutOrStdout())
			}
			if html == "" || !quiet(cmd) {
				return rep.WriteText(cmd.OutOrStdout())
			}
			return nil
		},
	}
	fl := c.Flags()
	fl.BoolVar(&asJSON, "json", false, "print JSON")
	fl.StringVar(&html, "html", "", "also write a self-contained HTML report with plots to this file")
	fl.Float64Var(&maxErr, "max-error", 0, "largest acceptable disagreement among autolabelled items (default: the round's, 0.05)")
	fl.Float64Var(&conf, "confidence", 0, "confidence level of the error bound (default: the round's, 0.95)")
	fl.BoolVar(&requireCe, "require-ceiling", false, "GO also needs the machine to agree with the crowd as well as the median annotator")
	fl.BoolVar(&requireSt, "require-stable", false, "GO also needs the stopping rule (stable predictions)")
	return c
}

func newAutolabelCmd() *cobra.Command {
	var (
		threshold string
		force     bool
		asJSON    bool
	)
	c := &cobra.Command{
		Use:   "autolabel DIR",
		Short: "Write machine labels above the threshold; queue the rest for people",
		Long: `autolabel scores every unlabelled item with the latest round's model, writes a
machine label (class, calibrated confidence, model version, round) for each
item at or above the threshold, and queues the rest for people (write them
with ` + "`loop next DIR --below-threshold`" + `). The threshold is the verdict's
(auto) unless you give one. Without a GO verdict it refuses unless --force.

Machine labels are evidence, not truth: audit a random sample afterwards with
` + "`loop next DIR --audit N`" + `.`,
		Example: `  loop autolabel proj
  loop autolabel proj --threshold 0.9 --force`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			var cfg round.AutolabelConfig
			if threshold != "auto" {
				x, err := strconv.ParseFloat(threshold, 64)
				if err != nil || x <= 0 || x > 1 {
					return usageErrorf("--threshold %q: want auto or a number in (0, 1]", threshold)
				}
				cfg.Threshold = x
			}
			cfg.Force = force
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			bar := newProgress(cmd, -1, "scoring")
			r, err := round.Autolabel(s, cfg, source(cmd))
			bar.Finish()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, r)
			}
			outf(cmd, "autolabel with model %s (round %d) at threshold %.4g:\n", r.Model, r.Round, r.Threshold)
			outf(cmd, "  %d unlabelled items scored: %d machine-labelled, %d left for people\n", r.Scored, r.Labelled, r.Queued)
			if r.Forced {
				outf(cmd, "  FORCED without a GO verdict: no error bound holds for these labels; audit them\n")
			} else if r.Bound > 0 {
				outf(cmd, "  upper bound on disagreement with the crowd at this threshold: %.3f\n", r.Bound)
			}
			hintf(cmd, "  next: `loop next %s --audit 100` to measure the real error\n", args[0])
			return nil
		},
	}
	c.Flags().StringVar(&threshold, "threshold", "auto", "auto (the verdict's) or a confidence in (0, 1]")
	c.Flags().BoolVar(&force, "force", false, "autolabel even without a GO verdict")
	c.Flags().BoolVar(&asJSON, "json", false, "print JSON")
	return c
}

func newModelCmd() *cobra.Command {
	c := &cobra.Command{
		Use:   "model",
		Short: "Work with trained models",
	}
	c.AddCommand(&cobra.Command{
		Use:   "export DIR FILE",
		Short: "Write the latest model, with the verdict's threshold, to a file",
		Long: `model export writes the latest round's model — feature configuration,
vocabulary or feature names, class keys, the training set's fingerprint, its
metrics and the verdict's autolabel threshold — to FILE, for bulk autolabelling
elsewhere (see beam/).`,
		Example: `  loop model export proj model.hom`,
		Args:    cobra.ExactArgs(2),
		RunE: func(cmd *cobra.Command, args []string) error {
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			m, r, err := round.LatestMachine(s)
			if err != nil {
				return err
			}
			if r.Verdict != nil && r.Verdict.Threshold.Found {
				m.Cutoff = r.Verdict.Threshold.Threshold
			}
			w, done, err := openOutput(cmd, args[1])
			if err != nil {
				return err
			}
			err = learner.WriteMachine(w, m)
			if derr := done(err == nil); err == nil {
				err = derr
			}
			if err != nil {
				return err
			}
			infof(cmd, "model %s written to %s (threshold %.4g)\n", m.Version(), args[1], m.Cutoff)
			return s.Record(source(cmd), "model.export", fmt.Sprintf("%s to %s", m.Version(), args[1]))
		},
	})
	return c
}

func roundStatus(s *store.Store) (any, string, error) {
	r, err := round.Latest(s)
	if err != nil {
		return nil, "", nil
	}
	v := map[string]any{"round": r.Round, "model": r.Model, "decision": r.Verdict.Decision, "held_out": r.HeldOut, "pool": r.Pool}
	return v, fmt.Sprintf("latest round %d, model %s: %s\n", r.Round, r.Model, r.Verdict.Headline()), nil
}

var _ = os.Stdout
var _ verdict.Options
