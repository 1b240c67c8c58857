package main

import (
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"handoff/crowd"
	"handoff/round"
	"handoff/store"
)

func init() {
	register(newConsensusCmd)
	registerStatus("consensus", consensusStatus)
}

// cleaningFlags binds the cleaning rules' switches to a command's flags.
type cleaningFlags struct {
	keepRepeats                  bool
	noRepeatOffenders            bool
	repeatItems, repeatTimes     int
	noGoldScreen                 bool
	goldMinAccuracy              float64
	goldMinItems                 int
	minSeconds                   float64
	noStraightLining, noCleaning bool
	dropSpammers                 bool
	spammerBelow                 float64
	spammerMinLabels             int
}

func (f *cleaningFlags) bind(c *cobra.Command) {
	d := crowd.DefaultRules()
	fl := c.Flags()
	fl.BoolVar(&f.keepRepeats, "keep-repeats", false, "keep every label an annotator gave an item (default: the first only)")
	fl.BoolVar(&f.noRepeatOffenders, "no-repeat-offenders", false, "keep annotators who labelled many items many times")
	fl.IntVar(&f.repeatItems, "repeat-items", d.RepeatItems, "repeat offenders: more than this many items…")
	fl.IntVar(&f.repeatTimes, "repeat-times", d.RepeatTimes, "…each labelled more than this many times")
	fl.BoolVar(&f.noGoldScreen, "no-gold-screen", false, "keep annotators who do badly on gold items")
	fl.Float64Var(&f.goldMinAccuracy, "gold-min-accuracy", d.GoldMinAccuracy, "gold screening: drop annotators below this accuracy on gold…")
	fl.IntVar(&f.goldMinItems, "gold-min-items", d.GoldMinItems, "…once they answered at least this many gold items")
	fl.Float64Var(&f.minSeconds, "min-seconds", 0, "drop labels given in under this many seconds (0: off)")
	fl.BoolVar(&f.noStraightLining, "no-straight-lining", false, "do not flag annotators who give one class to nearly everything")
	fl.BoolVar(&f.dropSpammers, "drop-spammers", false, "drop annotators whose answers hardly depend on the item (spammer score below --spammer-below)")
	fl.Float64Var(&f.spammerBelow, "spammer-below", d.SpammerBelow, "spammer rule: drop annotators whose spammer score is below this…")
	fl.IntVar(&f.spammerMinLabels, "spammer-min-labels", d.SpammerMinLabels, "…once they gave at least this many labels")
	fl.BoolVar(&f.noCleaning, "no-cleaning", false, "apply no cleaning rule at all")
}

func (f *cleaningFlags) rules() crowd.Rules {
	r := crowd.DefaultRules()
	r.FirstOnly = !f.keepRepeats
	r.RepeatOffenders = !f.noRepeatOffenders
	r.RepeatItems, r.RepeatTimes = f.repeatItems, f.repeatTimes
	r.GoldScreen = !f.noGoldScreen
	r.GoldMinAccuracy, r.GoldMinItems = f.goldMinAccuracy, f.goldMinItems
	r.TooFast = f.minSeconds > 0
	r.MinSeconds = f.minSeconds
	r.StraightLining = !f.noStraightLining
	r.Spammers, r.SpammerBelow, r.SpammerMinLabels = f.dropSpammers, f.spammerBelow, f.spammerMinLabels
	if f.noCleaning {
		return crowd.Rules{}
	}
	return r
}

func newConsensusCmd() *cobra.Command {
	var (
		cfg     = round.DefaultConsensus()
		clean   cleaningFlags
		explain bool
		asJSON  bool
	)
	c := &cobra.Command{
		Use:   "consensus DIR",
		Short: "Clean and combine the crowd labels into one answer per item",
		Long: `consensus applies the cleaning rules (each drop is recorded with its reason),
combines what is left into one posterior per item — Dawid–Skene by default,
or majority vote or one-coin — and stores it for the next steps. Each
annotator gets a confusion matrix and a reliability figure (expected accuracy).

With --debias COVARIATE it also corrects a bias that everyone shares and that
depends on the covariate (for example magnification): against gold items when
the project has them, otherwise against a stratum you name as unbiased with
--reference-stratum, assuming the true class mix is the same in every stratum.`,
		Example: `  loop consensus proj
  loop consensus proj --method majority --explain
  loop consensus proj --debias magnification --reference-stratum 40
  loop consensus proj --keep-repeats --no-cleaning --json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if !slices.Contains(round.Methods, cfg.Method) {
				return usageErrorf("--method %q: want one of %s", cfg.Method, strings.Join(round.Methods, ", "))
			}
			if !(clean.spammerBelow > 0 && clean.spammerBelow < 1) || clean.spammerMinLabels < 1 {
				return usageErrorf("--spammer-below must be in (0, 1) and --spammer-min-labels ≥ 1")
			}
			if cfg.Reference != "" && cfg.Debias == "" {
				return usageErrorf("--reference-stratum needs --debias COVARIATE")
			}
			cfg.Rules = clean.rules()
			cfg.NoCleaning = clean.noCleaning
			s, err := openStore(args[0])
			if err != nil {
				return err
			}
			defer s.Close()
			bar := newProgress(cmd, -1, "combining")
			rep, err := round.Consensus(s, cfg, source(cmd))
			bar.Finish()
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd, rep)
			}
			outf(cmd, "%s", consensusText(rep, explain))
			return nil
		},
	}
	fl := c.Flags()
	fl.StringVar(&cfg.Method, "method", cfg.Method, "combining model: "+strings.Join(round.Methods, ", ")+" (auto: the hierarchical model unless another predicts held-out labels clearly better)")
	fl.Float64Var(&cfg.Smoothing, "smoothing", 0, "Dirichlet pseudo-count added to each confusion cell (dawid-skene, one-coin; the class prior only for hierarchical)")
	fl.StringVar(&cfg.Debias, "debias", "", "correct a bias shared by everyone that depends on this covariate")
	fl.StringVar(&cfg.Reference, "reference-stratum", "", "the covariate value taken as unbiased when there is no gold")
	fl.IntVar(&cfg.Strata, "strata", 5, "quantile bins for a numeric covariate with many values")
	fl.Float64Var(&cfg.Uncertain, "uncertain-below", 0.95, "an item whose posterior is below this still needs labels")
	fl.Uint64Var(&cfg.Seed, "seed", 1, "seed for the tie-break of majority vote")
	fl.BoolVar(&explain, "explain", false, "list every drop and flag of the cleaning rules")
	fl.BoolVar(&asJSON, "json", false, "print the full report as JSON")
	clean.bind(c)
	return c
}

func consensusText(r *round.ConsensusReport, explain bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "consensus: %s over %d items; %d of %d labels kept after cleaning\n", modelName(r), r.Items, r.LabelsKept, r.LabelsIn)
	b.WriteString(modelText(r))
	if r.Iterations > 0 {
		conv := "converged"
		if !r.Converged {
			conv = fmt.Sprintf("NOT converged after %d iterations: the posteriors are those of the last iteration; compare with --method one-coin", r.Iterations)
		}
		fmt.Fprintf(&b, "  EM: %d iterations, log-likelihood %.3f, %s\n", r.Iterations, r.LogLik, conv)
	}
	if r.Ties > 0 {
		fmt.Fprintf(&b, "  majority ties broken at random (seeded): %d items\n", r.Ties)
	}
	fmt.Fprintf(&b, "  gold items: %d\n", r.Gold)
	fmt.Fprintf(&b, "  items with no labels after cleaning: %d\n", r.NoLabels)
	fmt.Fprintf(&b, "  items still uncertain (posterior < %.2f): %d — ask for more labels there\n", r.Config.Uncertain, r.Uncertain)
	b.WriteString("  class shares (prior):")
	for k, c := range r.Classes {
		fmt.Fprintf(&b, " %s %.3f", c, r.Prior[k])
	}
	b.WriteString("\n")
	b.WriteString("cleaning rules:\n")
	for _, s := range r.Rules {
		state := "off"
		if s.On {
			state = "on"
		}
		if s.Flagged > 0 || s.Rule == crowd.RuleStraightLining {
			fmt.Fprintf(&b, "  %-18s %-3s flagged %d annotators (nothing dropped)", s.Rule, state, s.Flagged)
		} else {
			fmt.Fprintf(&b, "  %-18s %-3s dropped %d labels, %d annotators", s.Rule, state, s.Labels, s.Annotators)
		}
		if s.Note != "" {
			fmt.Fprintf(&b, " (%s)", s.Note)
		}
		b.WriteString("\n")
	}
	if explain {
		if len(r.Drops) == 0 {
			b.WriteString("  no drops or flags\n")
		}
		for _, d := range r.Drops {
			what := "dropped"
			if d.Flag {
				what = "flagged"
			}
			where := d.Annotator
			if d.Item != "" {
				where += " on " + d.Item
			}
			fmt.Fprintf(&b, "  %s %s [%s]: %s\n", what, where, d.Rule, d.Reason)
		}
	}
	if d := r.Debias; d != nil {
		fmt.Fprintf(&b, "debiasing by %q (%s", d.Covariate, d.Method)
		if d.Reference != "" {
			fmt.Fprintf(&b, ", reference stratum %s", d.Reference)
		}
		fmt.Fprintf(&b, "); class shares per stratum before → after:\n")
		for _, s := range d.Strata {
			fmt.Fprintf(&b, "  %-10s %5d items:", s.Name, s.Items)
			for k, c := range r.Classes {
				if s.Items == 0 {
					continue
				}
				fmt.Fprintf(&b, " %s %.2f→%.2f", c, s.Before[k], s.After[k])
			}
			b.WriteString("\n")
		}
	}
	var kept, gone []round.AnnotatorReport
	for _, a := range r.Annotators {
		if a.Labels > 0 {
			kept = append(kept, a)
		} else if a.Dropped > 0 {
			gone = append(gone, a)
		}
	}
	sortBy(kept, func(a, b round.AnnotatorReport) bool { return a.Reliability < b.Reliability })
	b.WriteString("annotators (lowest reliability first):\n")
	show := kept
	if len(show) > 10 && !explain {
		show = show[:10]
	}
	for _, a := range show {
		fmt.Fprintf(&b, "  %-20s reliability %.3f  labels %d  dropped %d\n", a.ID, a.Reliability, a.Labels, a.Dropped)
	}
	if len(show) < len(kept) {
		fmt.Fprintf(&b, "  … %d more (--explain or --json lists all)\n", len(kept)-len(show))
	}
	if len(gone) > 0 {
		ids := make([]string, len(gone))
		for i, a := range gone {
			ids[i] = a.ID
		}
		fmt.Fprintf(&b, "  dropped entirely by the cleaning rules: %s\n", strings.Join(ids, ", "))
	}
	return b.String()
}

func consensusStatus(s *store.Store) (any, string, error) {
	_, r, err := round.StoredConsensus(s)
	if errors.Is(err, round.ErrNothing) {
		return nil, "", nil
	}
	if err != nil {
		return nil, "", err
	}
	v := map[string]any{
		"method": r.Config.Method, "items": r.Items, "labels_kept": r.LabelsKept,
		"no_labels": r.NoLabels, "uncertain": r.Uncertain, "uncertain_below": r.Config.Uncertain,
	}
	t := fmt.Sprintf("method %s; %d items still uncertain (posterior < %.2f); %d with no labels after cleaning\n",
		r.Config.Method, r.Uncertain, r.Config.Uncertain, r.NoLabels)
	return v, t, nil
}

// modelName is the model a consensus used, with "(chosen)" when the method
// was auto.
func modelName(r *round.ConsensusReport) string {
	if r.Model == "" {
		return r.Config.Method
	}
	if r.Config.Method == crowd.MethodAuto {
		return r.Model + " (chosen automatically)"
	}
	return r.Model
}

// modelText says why the model was used, with each candidate's held-out
// score, and the hierarchical model's estimated prior.
func modelText(r *round.ConsensusReport) string {
	var b strings.Builder
	if c := r.Choice; c != nil {
		fmt.Fprintf(&b, "  why: %s\n", c.Reason)
		if len(c.Candidates) > 0 {
			fmt.Fprintf(&b, "  held-out labels: %s scored", thousands(c.HeldOut))
			if c.SampleItems < r.Items {
				fmt.Fprintf(&b, " (on a sample of %s items)", thousands(c.SampleItems))
			}
			b.WriteString("; mean log-probability of a held-out label, and its difference from hierarchical:\n")
			for _, m := range c.Candidates {
				conv := ""
				if !m.Converged {
					conv = "  (EM not converged)"
				}
				if m.Method == crowd.MethodHierarchical {
					fmt.Fprintf(&b, "    %-13s %8.4f%s\n", m.Method, m.LogLik, conv)
				} else {
					fmt.Fprintf(&b, "    %-13s %8.4f  %+.4f ± %.4f%s\n", m.Method, m.LogLik, m.Diff, m.SE, conv)
				}
			}
		}
		if c.Warning != "" {
			fmt.Fprintf(&b, "  warning: %s; plain dawid-skene overfits here\n", c.Warning)
		}
	}
	if h := r.Hier; h != nil {
		k := len(r.Classes)
		bt, bc, bv := 0, 0, -1.0
		for t := 0; t < k; t++ {
			for c := 0; c < k; c++ {
				if c != t && h.Pooled[t*k+c] > bv {
					bt, bc, bv = t, c, h.Pooled[t*k+c]
				}
			}
		}
		fmt.Fprintf(&b, "  prior (estimated from the labels): row strength %.3g labels, skill spread %.2f (log-odds), largest shared confusion %s → %s %.2f\n",
			h.Beta, h.SkillSD, r.Classes[bt], r.Classes[bc], bv)
	}
	return b.String()
}

// thousands writes n with commas between groups of three digits.
func thousands(n int) string {
	s := strconv.Itoa(n)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, r := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(r)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}
