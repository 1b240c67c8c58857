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

func iv(v Interval) string { return fmt.Sprintf("%.3f [%.3f, %.3f]", v.Est, v.Lo, v.Hi) }

// Headline is the decision in one line.
func (r *Report) Headline() string {
	d := r.Decision
	if d.Go {
		return fmt.Sprintf("GO: autolabel at confidence ≥ %.4g; expected archive coverage %s; disagreement ≤ %s at %.0f%% confidence",
			d.Threshold, pct(d.ArchiveCoverage), pct(d.Bound), 100*r.Settings.Confidence)
	}
	s := "NOT YET"
	if d.LabelsNeeded >= 0 {
		s += fmt.Sprintf(": about %d more labels estimated", d.LabelsNeeded)
	}
	return s
}

// WriteText writes the report for a terminal: plain text, one section per
// part.
func (r *Report) WriteText(w io.Writer) error {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	d := r.Decision
	p("VERDICT  %s\n", r.Headline())
	for _, s := range d.Reasons {
		p("  why: %s\n", s)
	}
	for _, s := range d.Notes {
		p("  note: %s\n", s)
	}
	a := r.Agreement
	p("\nHeld-out agreement, machine vs consensus (n = %d; %.0f%% percentile bootstrap intervals, B = %d)\n", a.N, 100*a.Level, a.B)
	p("  accuracy        %s\n  Cohen's kappa   %s\n  macro-F1        %s\n", iv(a.Accuracy), iv(a.Kappa), iv(a.MacroF1))
	wid := 5
	for _, c := range r.Classes {
		wid = max(wid, len(c))
	}
	p("  %-*s  %7s  %9s  %-22s  %-22s\n", wid, "class", "support", "predicted", "precision", "recall")
	for _, c := range a.Classes {
		p("  %-*s  %7d  %9d  %-22s  %-22s\n", wid, c.Class, c.Support, c.Predicted, iv(c.Precision), iv(c.Recall))
	}
	p("\nConfusion matrix (rows: consensus, columns: machine)\n  %-*s", wid, "")
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
	if c := r.Ceiling; c != nil {
		rel := "below"
		if c.AtLeastMedian {
			rel = "at least as good as"
		}
		p("\nCrowd ceiling (%d annotators, kappa against the leave-one-out consensus)\n", len(c.Annotators))
		p("  median %.3f, quartiles [%.3f, %.3f]; machine %.3f: %s the median annotator\n", c.Median, c.Q1, c.Q3, c.MachineKappa, rel)
	}
	th := r.Threshold
	p("\nCoverage–risk (max-error %.3g, one-sided Clopper–Pearson at %.0f%%, fixed-sequence test, ≥ %d items per tested threshold)\n",
		th.MaxError, 100*th.Level, th.MinCount)
	if th.Found {
		p("  threshold %.4g: %d held-out items (%s), %d disagreements (%s), upper bound %s; archive coverage %s\n",
			th.Threshold, th.N, pct(th.Coverage), th.Errors, pct(th.Risk), pct(th.Upper), pct(th.Archive))
	} else {
		p("  no threshold passed\n")
	}
	p("  %s\n", th.Stop)
	p("\nCalibration: ECE %.4f over %d equal-width bins\n", r.Calibration.ECE, len(r.Calibration.Bins))
	if s := r.Stop; s != nil {
		p("\nStop rule (kappa between consecutive rounds on the stop set ≥ %.2f for %d rounds): ", s.Threshold, s.Window)
		if s.Stable {
			p("stable\n")
		} else {
			p("not yet\n")
		}
		if len(s.Kappas) > 0 {
			p("  kappas:")
			for _, k := range s.Kappas {
				p(" %.4f", k)
			}
			p("\n")
		}
	}
	if f := r.Fit; f != nil {
		p("\nLearning curve: err(n) = %.4g·n^−%.4g + %.4g over %d rounds\n", f.A, f.B, f.C, len(r.Curve))
		if f.Reachable {
			p("  target error %.3g reached at about %d labels (%d more)\n", f.Target, f.LabelsAt, f.More)
		} else {
			p("  target error %.3g not reachable: the curve levels off at %.4f\n", f.Target, f.C)
		}
	} else if r.FitError != "" {
		p("\nLearning curve: %s\n", r.FitError)
	}
	if au := r.Audit; au != nil {
		p("\nAudit after handoff: %d errors in %d machine labels, %s [%s, %s] (%.0f%% Clopper–Pearson)\n",
			au.Errors, au.N, pct(au.Rate), pct(au.Lo), pct(au.Hi), 100*au.Level)
	}
	_, err := io.WriteString(w, b.String())
	return err
}
