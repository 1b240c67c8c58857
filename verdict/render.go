package verdict

import (
	"encoding/json"
	"fmt"
	"io"
	"strings"
)

// WriteJSON writes the report as indented JSON with the stable field names
// documented in the package comment. A Report decoded from it (encoding/json)
// renders the same text and HTML, so a stored verdict can be shown again.
func (r *Report) WriteJSON(w io.Writer) error {
	e := json.NewEncoder(w)
	e.SetIndent("", "  ")
	return e.Encode(r)
}

// pct formats a share as a percentage with one decimal, dropping ".0".
func pct(v float64) string {
	return strings.Replace(fmt.Sprintf("%.1f%%", 100*v), ".0%", "%", 1)
}

// kappaText is the held-out kappa with its interval, or why it has none.
func kappaText(a Agreement) string {
	switch {
	case strings.HasPrefix(a.KappaNote, "no estimate"):
		return a.KappaNote
	case a.KappaNote != "":
		return fmt.Sprintf("%.3f (%s)", a.Kappa.Est, a.KappaNote)
	}
	return iv(a.Kappa)
}

func iv(v Interval) string { return fmt.Sprintf("%.3f [%.3f, %.3f]", v.Est, v.Lo, v.Hi) }

// ivp formats an interval that may be absent ("no estimate").
func ivp(v *Interval, denom string) string {
	if v == nil {
		return "no estimate (0 " + denom + ")"
	}
	return iv(*v)
}

// Headline is the decision in one line.
func (r *Report) Headline() string {
	d := r.Decision
	s := r.Settings
	if d.Go {
		return fmt.Sprintf("GO: autolabel at confidence ≥ %.4g; expected archive coverage %s; disagreement with the reference ≤ %s at %.0f%% confidence over all looks (look %d)",
			d.Threshold, pct(d.ArchiveCoverage), pct(d.Bound), 100*s.Confidence, s.Look)
	}
	out := "NOT YET"
	if len(d.HeldBy) > 0 {
		out += " (held back by: " + d.heldBy() + ")"
	}
	if d.LabelsNeeded >= 0 {
		out += fmt.Sprintf("; about %d more labels estimated", d.LabelsNeeded)
	}
	return out
}

// WriteText writes the report for a terminal: plain text, one section per
// part.
func (r *Report) WriteText(w io.Writer) error {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	d := r.Decision
	s := r.Settings
	p("VERDICT  %s\n", r.Headline())
	for _, x := range d.Reasons {
		p("  why: %s\n", x)
	}
	for _, x := range d.Notes {
		p("  note: %s\n", x)
	}
	if len(r.Questions) > 0 {
		p("\nQuestions (each with its own machine and verdict; the detail below is the first question's)\n")
		for _, q := range r.Questions {
			for i, l := range q.Lines() {
				if i > 0 {
					l = "  " + l
				}
				p("  %s\n", l)
			}
		}
	}
	p("\nLook %d: α = %.3g spent across looks by %s; this look tests at α_%d = %.3g (level %.6g)\n",
		s.Look, s.Alpha, s.Spending, s.Look, s.LookAlpha, 1-s.LookAlpha)
	if st := r.Standard; st != nil {
		p("\nReference standard (held-out set: %d items, a random %s of the archive; an item meets the standard when gold, at consensus posterior ≥ %.3g, or with %d labels; it counts from the %s round after the one that first saw it labelled)\n",
			st.Members, pct(st.Share), st.Level, st.Cap, ordinal(st.Lag))
		p("  %d count and meet it, %d count but do not yet (as disagreements where covered), %d labelled too recently to count, %d have no labels yet\n", st.Met, st.Below, st.Pending, st.Waiting)
	}
	a := r.Agreement
	if a.N > 0 {
		p("\nHeld-out agreement, machine vs reference (n = %d; %.0f%% intervals: percentile bootstrap, B = %d, for the first three; exact Clopper–Pearson per class)\n", a.N, 100*a.Level, a.B)
		p("  accuracy        %s\n  Cohen's kappa   %s\n  macro-F1        %s\n", iv(a.Accuracy), kappaText(a), iv(a.MacroF1))
		wid := 5
		for _, c := range r.Classes {
			wid = max(wid, len(c))
		}
		p("  %-*s  %7s  %9s  %-26s  %-26s\n", wid, "class", "support", "predicted", "precision", "recall")
		for _, c := range a.Classes {
			p("  %-*s  %7d  %9d  %-26s  %-26s\n", wid, c.Class, c.Support, c.Predicted, ivp(c.Precision, "predicted"), ivp(c.Recall, "support"))
		}
		p("\nConfusion matrix (rows: reference, columns: machine)\n  %-*s", wid, "")
		for _, c := range r.Classes {
			p("  %*s", max(6, len(c)), c)
		}
		p("\n")
		for t, row := range a.Confusion {
			p("  %-*s", wid, r.Classes[t])
			for q, v := range row {
				p("  %*d", max(6, len(r.Classes[q])), v)
			}
			p("\n")
		}
	}
	if c := r.Ceiling; c != nil {
		rel := "below"
		if c.AtLeastMedian {
			rel = "at least as good as"
		}
		p("\nCrowd ceiling (%d annotators against the leave-one-out consensus)\n", len(c.Annotators))
		p("  kappa: median %.3f, quartiles [%.3f, %.3f]; machine %.3f on all held-out items\n", c.Median, c.Q1, c.Q3, c.MachineKappa)
		p("  agreement: median annotator %s; machine %s on the %d held-out items it would autolabel: %s the median annotator\n",
			pct(c.MedianAgreement), pct(c.MachineAgreement), c.MachineItems, rel)
	}
	th := r.Threshold
	p("\nCoverage–risk (max-error %.3g, one-sided Clopper–Pearson at level 1 − α_%d, fixed-sequence test, ≥ %d items per tested threshold)\n",
		th.MaxError, s.Look, th.MinCount)
	if th.Found {
		p("  threshold %.4g: %d held-out items (%s), %d disagreements (%s), upper bound %s; archive coverage %s\n",
			th.Threshold, th.N, pct(th.Coverage), th.Errors, pct(th.Risk), pct(th.Upper), pct(th.Archive))
		if th.Unsettled > 0 {
			p("  of those, %d below the reference standard count as disagreements until they meet it\n", th.Unsettled)
		}
	} else {
		p("  no threshold passed\n")
	}
	p("  %s\n", th.Stop)
	if t := r.Truth; t != nil {
		p("\nAgainst the truth (gold): the consensus errs on %d of %d gold items, %s [%s, %s]\n", t.GoldErrors, t.GoldItems, pct(t.Rate), pct(t.Lo), pct(t.Hi))
		p("  machine vs truth on the autolabelled items ≤ %s = disagreement bound %s (machine vs reference) + consensus-error bound %s (reference vs truth, on gold), each one-sided at level 1 − α_%d/2\n",
			pct(t.Total), pct(t.Disagreement), pct(t.ConsensusError), s.Look)
	}
	if a.N > 0 {
		p("\nCalibration: ECE %.4f over %d equal-width bins\n", r.Calibration.ECE, len(r.Calibration.Bins))
	}
	if st := r.Stop; st != nil {
		p("\nStop rule (kappa between consecutive rounds with new labels on the stop set ≥ %.2f for %d rounds): ", st.Threshold, st.Window)
		if st.Stable {
			p("stable\n")
		} else {
			p("not yet\n")
		}
		if len(st.Kappas) > 0 {
			p("  kappas:")
			for _, k := range st.Kappas {
				p(" %.4f", k)
			}
			p("\n")
		}
	}
	if len(r.Curve) > 0 {
		p("\nLearning curve (error on one fixed evaluation set against labels spent, %d rounds with new labels): ", len(r.Curve))
		for i, q := range r.Curve {
			if i > 0 {
				p(", ")
			}
			p("%d → %.3f", q.Labels, q.Error)
		}
		p("\n")
		if f := r.Fit; f != nil {
			if f.Fitted {
				p("  err(n) = %.4g·n^−%.4g + %.4g (R² %.2f)\n", f.A, f.B, f.C, f.R2)
			}
			if f.More == 0 {
				p("  target error %.3g reached with the %d labels spent\n", f.Target, f.Spent)
			} else {
				p("  target error %.3g reached at about %d labels: %d more, %.0f%% bootstrap interval %s\n", f.Target, f.LabelsAt, f.More, 100*f.Level, moreRange(f))
			}
		} else if r.FitError != "" {
			p("  %s\n", r.FitError)
		}
	}
	if au := r.Audit; au != nil {
		p("\nAudit after handoff: %d errors in %d machine labels, %s [%s, %s] (%.0f%% Clopper–Pearson)\n",
			au.Errors, au.N, pct(au.Rate), pct(au.Lo), pct(au.Hi), 100*au.Level)
	}
	if len(r.Run) > 0 {
		p("\nSettings of the round (stored unless marked):\n ")
		col := 1
		for i, x := range r.Run {
			item := x.Key + " " + x.Value
			if x.Source != "" && x.Source != "stored" {
				item += " (" + x.Source + ")"
			}
			if i < len(r.Run)-1 {
				item += ","
			}
			if col+1+len([]rune(item)) > 100 {
				p("\n ")
				col = 1
			}
			p(" %s", item)
			col += 1 + len([]rune(item))
		}
		p("\n")
	}
	_, err := io.WriteString(w, b.String())
	return err
}

// moreRange formats the bootstrap interval of the labels still needed.
func moreRange(f *PowerLaw) string {
	if f.MoreHi < 0 {
		return fmt.Sprintf("[%d, beyond 3× the labels spent]", f.MoreLo)
	}
	return fmt.Sprintf("[%d, %d]", f.MoreLo, f.MoreHi)
}

func ordinal(n int) string {
	switch n {
	case 0:
		return "same"
	case 1:
		return "next"
	case 2:
		return "second"
	case 3:
		return "third"
	}
	return fmt.Sprintf("%dth", n)
}
