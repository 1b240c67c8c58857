package round

// The text forms of the reports, as the command line prints them (the
// JSON forms are the types themselves).

import (
	"fmt"
	"sort"
	"strconv"
	"strings"

	"handoff/crowd"
)

// Text is the report as `loop consensus` prints it: the method and labels
// kept, EM's convergence, ties, gold, items left uncertain, the class
// shares, each cleaning rule's drops (with explain, every drop and flag),
// the debiasing by stratum, and the annotators from the lowest
// reliability (the ten lowest unless explain).
func (r *ConsensusReport) Text(explain bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "consensus: %s over %d items; %d of %d labels kept after cleaning\n", r.modelName(), r.Items, r.LabelsKept, r.LabelsIn)
	b.WriteString(r.modelText())
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
	if r.NotAsked > 0 {
		fmt.Fprintf(&b, "  items not asked (their parent answer's consensus is outside the condition): %d\n", r.NotAsked)
	}
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
	var kept, gone []AnnotatorReport
	for _, a := range r.Annotators {
		if a.Labels > 0 {
			kept = append(kept, a)
		} else if a.Dropped > 0 {
			gone = append(gone, a)
		}
	}
	sort.SliceStable(kept, func(i, j int) bool { return kept[i].Reliability < kept[j].Reliability })
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

// modelName is the model a consensus used, with "(chosen)" when the method
// was auto.
func (r *ConsensusReport) modelName() string {
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
func (r *ConsensusReport) modelText() string {
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

// estimate is an estimate with its bootstrap interval, or why it is
// undefined.
func estimate(e crowd.Estimate) string {
	if !e.Defined {
		return "undefined (" + e.Note + ")"
	}
	if e.Reps == 0 {
		return fmt.Sprintf("%.3f", e.Value)
	}
	return fmt.Sprintf("%.3f [%.3f, %.3f]", e.Value, e.Lo, e.Hi)
}

// Text is the report as `loop agreement` prints it; the order-based
// alphas only for an ordinal codebook, annotators from the lowest kappa.
func (r *AgreementReport) Text() string {
	var b strings.Builder
	fmt.Fprintf(&b, "agreement over %d items, %d labels, %d annotators (95%% bootstrap intervals)\n", r.Items, r.Labels, r.Annotators)
	fmt.Fprintf(&b, "  Fleiss' kappa          %s   (P̄ %.3f, P̄e %.3f)\n", estimate(r.Fleiss), r.FleissPo, r.FleissPe)
	for _, m := range crowd.Metrics {
		if m != crowd.MetricNominal && !r.Ordinal {
			continue // order-based metrics mean nothing for unordered classes
		}
		if e, ok := r.Alpha[m]; ok {
			fmt.Fprintf(&b, "  Krippendorff's alpha, %-8s %s\n", m, estimate(e))
		}
	}
	if len(r.Pairs) > 0 {
		b.WriteString("pairs (Cohen's kappa):\n")
		for _, p := range r.Pairs {
			fmt.Fprintf(&b, "  %s × %s  %s  (%d items)\n", p.A, p.B, estimate(p.Kappa), p.Kappa.N)
		}
	}
	// Annotators with no label left after cleaning have no kappa: they are
	// listed once, apart, not as a row of "undefined".
	var l []AnnotatorKappa
	var none []string
	for _, a := range r.LeaveOneOut {
		if a.Labels == 0 {
			none = append(none, a.ID)
		} else {
			l = append(l, a)
		}
	}
	sort.SliceStable(l, func(i, j int) bool { return l[i].Kappa.Value < l[j].Kappa.Value })
	if len(l) > 0 {
		b.WriteString("each annotator against the leave-one-out majority (Cohen's kappa), lowest first:\n")
	}
	for _, a := range l {
		fmt.Fprintf(&b, "  %-20s %s  (%d items)\n", a.ID, estimate(a.Kappa), a.Kappa.N)
	}
	if len(none) > 0 {
		fmt.Fprintf(&b, "not counted, with no label left after the cleaning rules (`loop consensus DIR` says why), %d: %s\n", len(none), strings.Join(none, ", "))
	}
	return b.String()
}

// Text is the report as `loop train` prints it: the model, its
// cross-validated accuracy and macro-F1, and its calibration.
func (r *TrainReport) Text() string {
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

// Reasons counts a batch's items by reason, in order of first appearance:
// "held-out 20, model-unsure 180".
func Reasons(b []BatchItem) string {
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

// Text is the round as `loop round DIR` prints it: the round and its
// model, the settings (over are the ones the command line changed for this
// run), notes, the consensus, the training, the held-out set, the next
// batch and the verdict's headline.
func (r *Result) Text(dir string, over []Override) string {
	var b strings.Builder
	fmt.Fprintf(&b, "round %d (look %d): model %s\n", r.Round, r.Look, r.Model)
	fmt.Fprintf(&b, "  settings: %s\n", overridesText(over))
	for _, n := range r.Notes {
		fmt.Fprintf(&b, "  note: %s\n", n)
	}
	b.WriteString(indent(r.Consensus.Text(false)))
	b.WriteString(indent(r.Train.Text()))
	if st := r.Verdict.Standard; st != nil {
		fmt.Fprintf(&b, "  held-out set: %d items (a random %.3g of the archive): %d count and meet the reference standard, %d count but do not yet, %d labelled too recently to count, %d without labels\n",
			st.Members, r.HeldOutShare, st.Met, st.Below, st.Pending, st.Waiting)
	}
	fmt.Fprintf(&b, "  next batch: %d items (%s); write it with `loop next %s`\n", len(r.Batch), Reasons(r.Batch), dir)
	fmt.Fprintf(&b, "verdict: %s\n", r.Verdict.Headline())
	if len(r.Questions) > 0 {
		b.WriteString("questions (each with its own machine and verdict; the figures above are the first question's):\n")
		for _, q := range r.Summaries() {
			for i, l := range q.Lines() {
				if i > 0 {
					l = "  " + l
				}
				fmt.Fprintf(&b, "  %s\n", l)
			}
		}
	}
	return b.String()
}

// indent puts two spaces before every line of t.
func indent(t string) string {
	lines := strings.Split(strings.TrimRight(t, "\n"), "\n")
	for i, l := range lines {
		lines[i] = "  " + l
	}
	return strings.Join(lines, "\n") + "\n"
}

// overrideText says which settings a run overrode.
func overridesText(over []Override) string {
	if len(over) == 0 {
		return "the project's (`loop config DIR` shows them)"
	}
	var parts []string
	for _, o := range over {
		parts = append(parts, o.Key+" "+o.Value)
	}
	return "the project's, overridden for this run by the command line: " + strings.Join(parts, ", ")
}

// Text is the report as `loop autolabel` prints it.
func (r *AutolabelReport) Text() string {
	var b strings.Builder
	if len(r.Questions) > 0 && r.Questions[0].Why != "" {
		fmt.Fprintf(&b, "autolabel with the machines of round %d: %d machine labels; the first question %s\n", r.Round, r.Labelled, r.Questions[0].Why)
	} else {
		fmt.Fprintf(&b, "autolabel with model %s (round %d) at threshold %.4g:\n", r.Model, r.Round, r.Threshold)
		fmt.Fprintf(&b, "  %d items without crowd labels scored: %d machine-labelled, %d left for people\n", r.Scored, r.Labelled, r.Queued)
	}
	if r.Unscored > 0 {
		fmt.Fprintf(&b, "  %d items added since round %d have no score yet: run a round to score them\n", r.Unscored, r.Round)
	}
	if r.Forced {
		b.WriteString("  FORCED without a GO verdict: no error bound holds for these labels; audit them\n")
	} else if r.Bound > 0 {
		fmt.Fprintf(&b, "  upper bound on disagreement with the crowd at this threshold: %.3f\n", r.Bound)
	}
	if len(r.Questions) > 0 {
		b.WriteString("  per question (written only where the question has GO; a follow-up only where its parent's answer asks it):\n")
		for _, q := range r.Questions {
			switch {
			case q.Why != "":
				fmt.Fprintf(&b, "    %s: %s\n", q.Key, q.Why)
			default:
				fmt.Fprintf(&b, "    %s: %d of %d items scored machine-labelled at threshold %.4g", q.Key, q.Labelled, q.Scored, q.Threshold)
				if q.Bound > 0 {
					fmt.Fprintf(&b, " (upper bound on disagreement %.3f)", q.Bound)
				}
				b.WriteString("\n")
			}
		}
	}
	return b.String()
}
