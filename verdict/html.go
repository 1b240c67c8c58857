package verdict

import (
	"fmt"
	"html/template"
	"image/color"
	"io"
	"strconv"
	"unicode/utf8"
)

// cell is one confusion-matrix cell for the HTML table.
type cell struct {
	Count int
	Share Interval
	Style template.CSS
	Diag  bool
}

// confusionView is the confusion matrix as the page shows it. Columns carry
// the class names when they fit side by side; otherwise (more than five
// classes, or long names) they are numbered, and each row's name starts
// with its number, which serves as the key to the columns.
type confusionView struct {
	Numbered bool
	Cols     []confusionCol
	Rows     []confusionRow
}

type confusionCol struct{ Label, Title string }

type confusionRow struct {
	Label string
	Cells []cell
}

// shade is the colour of a share f ∈ [0, 1] of a confusion-matrix row:
// white at 0, teal at 1, linear in each channel (the key shows the ramp).
func shade(f float64) color.RGBA {
	return color.RGBA{uint8(255 - f*(255-float64(teal.R))), uint8(255 - f*(255-float64(teal.G))), uint8(255 - f*(255-float64(teal.B))), 0xff}
}

func (r *Report) confusion() confusionView {
	a := r.Agreement
	k := len(a.Confusion)
	total, longest := 0, 0
	for _, c := range r.Classes {
		n := utf8.RuneCountInString(c)
		total += n
		longest = max(longest, n)
	}
	v := confusionView{Numbered: k > 5 || total > 40 || longest > 14}
	for c := 0; c < k && c < len(r.Classes); c++ {
		name := r.Classes[c]
		col, row := confusionCol{Label: name}, confusionRow{Label: name}
		if v.Numbered {
			col = confusionCol{Label: strconv.Itoa(c + 1), Title: name}
			row.Label = strconv.Itoa(c+1) + " " + name
		}
		v.Cols = append(v.Cols, col)
		v.Rows = append(v.Rows, row)
	}
	for t, row := range a.Confusion {
		tot := 0
		for _, x := range row {
			tot += x
		}
		for q, x := range row {
			f := 0.0
			if tot > 0 {
				f = float64(x) / float64(tot)
			}
			// Shade by the share of the row (reference class); white text
			// on dark cells keeps the contrast readable.
			fg := "#1f2328"
			if f > 0.45 {
				fg = "#ffffff"
			}
			if t < len(v.Rows) {
				v.Rows[t].Cells = append(v.Rows[t].Cells, cell{Count: x, Share: a.Cells[t][q], Diag: t == q,
					Style: template.CSS(fmt.Sprintf("background:%s;color:%s", hex(shade(f)), fg))})
			}
		}
	}
	return v
}

// binsView is the reliability diagram's bins with items, for the table
// under it.
type binsView struct {
	Range, Confidence, Accuracy string
	N                           int
}

func (r *Report) bins() []binsView {
	var out []binsView
	for _, b := range r.Calibration.Bins {
		if b.N > 0 {
			out = append(out, binsView{Range: fmt.Sprintf("%.2f–%.2f", b.Lo, b.Hi), Confidence: fmt.Sprintf("%.3f", b.Confidence),
				Accuracy: fmt.Sprintf("%.3f", b.Accuracy), N: b.N})
		}
	}
	return out
}

// moreRangeCommas is moreRange with thousands separators.
func moreRangeCommas(f *PowerLaw) string {
	if f.MoreHi < 0 {
		return fmt.Sprintf("[%s, beyond 3× the labels spent]", commas(f.MoreLo))
	}
	return fmt.Sprintf("[%s, %s]", commas(f.MoreLo), commas(f.MoreHi))
}

var page = template.Must(template.New("report").Funcs(template.FuncMap{
	"pct":  pct,
	"iv":   iv,
	"ivp":  ivp,
	"more": moreRangeCommas,
	"n":    commas,
	"f3":   func(v float64) string { return fmt.Sprintf("%.3f", v) },
	"g4":   func(v float64) string { return fmt.Sprintf("%.4g", v) },
	"inc":  func(i int) int { return i + 1 },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;color:#1f2328;background:#fff;margin:2rem auto;max-width:60rem;padding:0 1rem;line-height:1.45;overflow-wrap:break-word}
h1{font-size:1.5rem;margin-bottom:.2rem}
h2{font-size:1.15rem;border-bottom:1px solid #c9cdd2;padding-bottom:.2rem;margin-top:2rem}
h3{font-size:1rem}
.go,.notyet{padding:.8rem 1rem;border-radius:4px;border-left:6px solid}
.go{background:#e9f3f1;border-color:#135e66}
.notyet{background:#f8ece8;border-color:#a3331a}
.wide{overflow-x:auto;max-width:100%}
table{border-collapse:collapse;margin:.5rem 0}
td,th{border:1px solid #c9cdd2;padding:.25rem .5rem;text-align:right;font-variant-numeric:tabular-nums}
th{background:#f1f3f5;text-align:left}
table.confusion th[title]{text-align:center}
td.diag{font-weight:bold}
.wide td,table.confusion th{white-space:nowrap}
small,.muted,figcaption{color:#4b535c}
figure{margin:1rem 0}
figure svg{display:block;max-width:100%;height:auto}
figcaption{font-size:.92rem;margin-top:.3rem}
ul.key{list-style:none;display:flex;flex-wrap:wrap;gap:.2rem 1.2rem;padding:0;margin:.4rem 0;font-size:.92rem}
.swatch{display:inline-block;position:relative;width:1.9rem;height:0;vertical-align:middle;margin-right:.4rem}
.mark{position:absolute;left:50%;top:calc(-.3rem - 1px);width:.6rem;height:.6rem;margin-left:-.3rem}
.mark.circle{border-radius:50%}
.mark.bar{top:-.45rem;height:.9rem;width:1.2rem;margin-left:-.6rem}
.ckey{display:flex;flex-wrap:wrap;align-items:center;gap:.4rem;font-size:.92rem;color:#4b535c}
.ramp{display:inline-block;width:8rem;height:.8rem;border:1px solid #c9cdd2}
@media (max-width:30rem){body{margin:1rem auto;padding:0 .6rem}td,th{padding:.2rem .3rem}}
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<p class="muted">{{n .R.Agreement.N}} held-out items meet the reference standard; {{len .R.Classes}} classes. Look {{.R.Settings.Look}}: α = {{g4 .R.Settings.Alpha}} spent across looks by {{.R.Settings.Spending}}; this look tests at α<sub>{{.R.Settings.Look}}</sub> = {{g4 .R.Settings.LookAlpha}}.</p>
{{with .R.Decision}}
<div class="{{if .Go}}go{{else}}notyet{{end}}">
<strong>{{$.Headline}}</strong>
{{if .Reasons}}<ul>{{range .Reasons}}<li>{{.}}</li>{{end}}</ul>{{end}}
</div>
{{if .Notes}}<ul class="muted">{{range .Notes}}<li>{{.}}</li>{{end}}</ul>{{end}}
{{end}}

{{with .R.Standard}}
<h2>Reference standard</h2>
<p>The held-out set is a random {{pct .Share}} of the archive ({{n .Members}} items). An item meets the reference standard when it is gold, when its consensus posterior reaches {{.Level}}, or once it has {{.Cap}} labels; a labelled item counts from {{.Lag}} round(s) after the round that first saw it labelled (from the first round for items labelled before it), met or not, so that which items count depends on time alone. {{n .Met}} count and meet it, {{n .Below}} count but do not yet (as disagreements wherever a threshold covers them), {{n .Pending}} were labelled too recently to count, {{n .Waiting}} have no labels yet.</p>
{{end}}
<h2>Agreement of machine and reference</h2>
{{with .R.Agreement}}
<p>Accuracy, kappa and macro-F1: percentile bootstrap {{pct .Level}} intervals from {{n .B}} resamples of the held-out items (seeded). Precision and recall: exact Clopper–Pearson {{pct .Level}} intervals.</p>
<div class="wide"><table>
<tr><th>figure</th><th>estimate [interval]</th></tr>
<tr><th>accuracy</th><td>{{iv .Accuracy}}</td></tr>
<tr><th>Cohen's kappa</th><td>{{if .KappaNote}}{{.KappaNote}}{{else}}{{iv .Kappa}}{{end}}</td></tr>
<tr><th>macro-F1</th><td>{{iv .MacroF1}}</td></tr>
</table></div>
<div class="wide"><table>
<tr><th>class</th><th>support</th><th>predicted</th><th>precision</th><th>recall</th><th>F1</th></tr>
{{range .Classes}}<tr><th>{{.Class}}</th><td>{{n .Support}}</td><td>{{n .Predicted}}</td><td>{{ivp .Precision "predicted"}}</td><td>{{ivp .Recall "support"}}</td><td>{{f3 .F1}}</td></tr>
{{end}}</table></div>
{{end}}
{{with .Confusion}}{{if .Rows}}
<h3>Confusion matrix</h3>
<p class="muted">Rows: reference class; columns: machine class{{if .Numbered}}, numbered as the rows{{end}}. Cells are counts, shaded by their share of the row; hover for the share of all items with its exact interval.</p>
<div class="wide"><table class="confusion">
<tr><th>reference \ machine</th>{{range .Cols}}<th scope="col"{{if .Title}} title="{{.Title}}"{{end}}>{{.Label}}</th>{{end}}</tr>
{{range .Rows}}<tr><th scope="row">{{.Label}}</th>{{range .Cells}}<td style="{{.Style}}"{{if .Diag}} class="diag"{{end}} title="{{pct .Share.Est}} of items [{{pct .Share.Lo}}, {{pct .Share.Hi}}]">{{n .Count}}</td>{{end}}</tr>
{{end}}</table></div>
<div id="confusion-key" class="ckey"><span>shade: share of the row</span><span>0%</span><span class="ramp" style="background:linear-gradient(to right,#ffffff,#135e66)"></span><span>100%</span></div>
{{end}}{{end}}

{{if .R.Ceiling}}{{with .R.Ceiling}}
<h2>Crowd ceiling</h2>
<p>Each annotator's Cohen's kappa against the consensus without them: median {{f3 .Median}}, quartiles [{{f3 .Q1}}, {{f3 .Q3}}], {{len .Annotators}} annotators; the machine's kappa on all held-out items is {{f3 .MachineKappa}}.
The median annotator agrees with the others on {{pct .MedianAgreement}} of their items; the machine agrees with the reference on {{pct .MachineAgreement}} of the {{n .MachineItems}} held-out items it would autolabel: {{if .AtLeastMedian}}at least as good as{{else}}below{{end}} the median annotator.</p>
{{end}}{{template "figure" .AnnotatorPlot}}{{end}}

{{if .R.Questions}}<h2>Questions</h2>
<p class="muted">Each question of the tree has its own machine and its own verdict; the sections below are the first question's.</p>
{{range .R.Questions}}<section class="question" id="question-{{.Key}}"><h3>{{.Key}}: {{.Decision}}</h3>
<ul>{{range .Lines}}<li>{{.}}</li>{{end}}</ul></section>
{{end}}{{end}}
<h2>Coverage and risk</h2>
{{with .R.Threshold}}
<p>Thresholds are the distinct held-out confidences, tested from the most confident down (fixed-sequence testing), each with a one-sided Clopper–Pearson upper bound on the disagreement at level {{.Level}} (this look's share of α); thresholds covering fewer than {{n .MinCount}} items are not tested.
{{if .Found}}Chosen threshold <strong>{{g4 .Threshold}}</strong>: {{n .N}} held-out items ({{pct .Coverage}}), {{n .Errors}} disagreements ({{pct .Risk}}{{if .Unsettled}}; {{n .Unsettled}} of them items below the reference standard, counted as disagreements{{end}}), upper bound {{pct .Upper}} ≤ max-error {{pct .MaxError}}; expected archive coverage {{pct .Archive}}.{{else}}No threshold passed.{{end}}
<br><small>{{.Stop}}</small></p>
{{end}}
{{template "figure" .RiskPlot}}
{{with .R.Truth}}
<h2>Against the truth</h2>
<p>The consensus errs on {{n .GoldErrors}} of {{n .GoldItems}} gold items: {{pct .Rate}} [{{pct .Lo}}, {{pct .Hi}}]. The machine's error against the truth on the autolabelled items is at most <strong>{{pct .Total}}</strong> = the disagreement bound {{pct .Disagreement}} (machine vs reference) + the consensus-error bound {{pct .ConsensusError}} (reference vs truth, measured on gold), each one-sided at level {{.Level}}.</p>
{{end}}

{{if .ReliabilityPlot.SVG}}<h2>Calibration</h2>
<p>Expected calibration error {{f3 .R.Calibration.ECE}} over {{len .R.Calibration.Bins}} equal-width confidence bins.</p>
{{template "figure" .ReliabilityPlot}}
{{if .Bins}}<div class="wide"><table id="bins">
<tr><th>confidence bin</th>{{range .Bins}}<td>{{.Range}}</td>{{end}}</tr>
<tr><th>mean confidence</th>{{range .Bins}}<td>{{.Confidence}}</td>{{end}}</tr>
<tr><th>share correct</th>{{range .Bins}}<td>{{.Accuracy}}</td>{{end}}</tr>
<tr><th>items</th>{{range .Bins}}<td>{{n .N}}</td>{{end}}</tr>
</table></div>{{end}}{{end}}

{{if .R.Stop}}{{with .R.Stop}}
<h2>Stop rule</h2>
<p>Cohen's kappa between consecutive rounds' predictions on the stop set (rounds with new labels only); stop once it is at least {{.Threshold}} for {{.Window}} rounds in a row:
<strong>{{if .Stable}}stable{{else}}not yet{{end}}</strong>.</p>
{{if .Kappas}}<div class="wide"><table><tr><th>rounds</th>{{range $i, $k := .Kappas}}<td>{{$i}}→{{inc $i}}</td>{{end}}</tr><tr><th>kappa</th>{{range .Kappas}}<td>{{printf "%.4f" .}}</td>{{end}}</tr></table></div>{{end}}
{{end}}{{end}}

{{if .R.Curve}}
<h2>Learning curve</h2>
<p class="muted">Each round's model scored on one fixed evaluation set (the held-out items that meet the reference standard now and that every round's model scored), against the labels spent by that round.</p>
{{if .R.Fit}}{{with .R.Fit}}<p>{{if .Fitted}}Inverse power law err(n) = {{g4 .A}}·n<sup>−{{g4 .B}}</sup> + {{g4 .C}} (R² {{f3 .R2}}; exponent constrained to [0.05, 2], floor to [0, the error reached]).{{end}}
{{if eq .More 0}}The target error {{pct .Target}} is reached with the {{n .Spent}} labels spent.{{else}}The target error {{pct .Target}} is reached at about {{n .LabelsAt}} labels: {{n .More}} more, {{pct .Level}} bootstrap interval {{more .}}.{{end}}</p>{{end}}
{{else}}<p>{{.R.FitError}}</p>{{end}}
{{template "figure" .CurvePlot}}
{{end}}

{{if .R.Audit}}{{with .R.Audit}}
<h2>Audit after handoff</h2>
<p>{{n .Errors}} errors in {{n .N}} machine-labelled items checked by people: {{pct .Rate}}, {{pct .Level}} Clopper–Pearson interval [{{pct .Lo}}, {{pct .Hi}}].</p>
{{end}}{{end}}

{{.Codings}}
<h2>Settings</h2>
{{with .R.Settings}}<p class="muted">Verdict: max-error {{.MaxError}}, confidence {{.Confidence}} over all looks (look {{.Look}}, α<sub>{{.Look}}</sub> = {{g4 .LookAlpha}}), bootstrap B = {{n .Bootstrap}} at level {{.Level}} with seed {{.Seed}}, minimum {{n .MinCount}} items per tested threshold, {{.Bins}} calibration bins, stop rule kappa ≥ {{.StopKappa}} for {{.StopWindow}} rounds, learning-curve target {{.TargetError}}, median-annotator gate {{if .MedianGate}}on{{else}}off{{end}}.</p>{{end}}
{{if .R.Run}}<div class="wide"><table><tr><th>setting</th><th>value</th><th>from</th></tr>{{range .R.Run}}<tr><th>{{.Key}}</th><td>{{.Value}}</td><td>{{.Source}}</td></tr>{{end}}</table></div>{{end}}
</body>
</html>
{{define "figure"}}{{if .SVG}}<figure id="{{.ID}}">{{.SVG}}
<figcaption>{{.Caption}}</figcaption>
{{if .Key}}<ul class="key" aria-label="Key">{{range .Key}}<li>{{.Swatch}}{{.Name}}</li>{{end}}</ul>{{end}}
</figure>{{end}}{{end}}
`))

// WriteHTML writes the report as one self-contained HTML page: inline CSS
// and inline SVG plots (coverage–risk with the bound, max-error and the
// chosen threshold; the reliability diagram with the items per bin; the
// learning curve; annotator reliability), each with an HTML key beside it,
// and the confusion matrix as one shaded table with a key to its shades.
// Nothing is fetched; every string is HTML-escaped; wide tables scroll
// inside their own box and the plots scale with the page, so it reads on
// a phone. title "" means "Handoff verdict".
func (r *Report) WriteHTML(w io.Writer, title string) error {
	if title == "" {
		title = "Handoff verdict"
	}
	data := struct {
		Title, Headline                                     string
		R                                                   *Report
		Confusion                                           confusionView
		Bins                                                []binsView
		RiskPlot, ReliabilityPlot, CurvePlot, AnnotatorPlot figure
		Codings                                             template.HTML
	}{Title: title, Headline: r.Headline(), R: r, Confusion: r.confusion(), Bins: r.bins()}
	var err error
	if data.Codings, err = r.codingsSection(); err != nil {
		return fmt.Errorf("independent codings: %w", err)
	}
	if len(r.CoverageRisk) > 0 {
		if data.RiskPlot, err = r.plotRisk(); err != nil {
			return fmt.Errorf("coverage–risk plot: %w", err)
		}
	}
	if r.Agreement.N > 0 {
		if data.ReliabilityPlot, err = r.plotReliability(); err != nil {
			return fmt.Errorf("reliability plot: %w", err)
		}
	}
	if len(r.Curve) > 0 {
		if data.CurvePlot, err = r.plotCurve(); err != nil {
			return fmt.Errorf("learning-curve plot: %w", err)
		}
	}
	if r.Ceiling != nil && len(r.Ceiling.Annotators) > 0 {
		if data.AnnotatorPlot, err = r.plotAnnotators(); err != nil {
			return fmt.Errorf("annotator plot: %w", err)
		}
	}
	return page.Execute(w, data)
}
