package verdict

import (
	"fmt"
	"html/template"
	"strings"

	"handoff/compare"
)

// codingsTmpl is the report's section on independent codings: how good the
// reference standard is that the machine is measured against. Its first
// row is the machine against the crowd (this report's held-out figures);
// the next rows are the crowd, the machine and the crowd's waves against
// independent codings and against each other.
var codingsTmpl = template.Must(template.New("codings").Parse(`
<h2>The crowd against independent codings</h2>
<p>The machine is measured against the crowd's consensus. How good that consensus is shows against codings made apart from it: reference codings by experts or an earlier study (kept apart from gold; never used for training, cleaning or this verdict) and the crowd's own later waves (test–retest). Percentile bootstrap intervals over items (item level) and parents (parent level); <code>loop compare</code> prints the same.</p>
<div class="wide"><table>
<tr><th>compared</th><th>level</th><th>n</th><th>accuracy</th><th>Cohen's kappa</th><th>Pearson's r</th><th>mean abs. difference</th></tr>
<tr><th>machine vs crowd consensus (held-out reference standard)</th><td>items</td><td>{{.Held.N}}</td><td>{{.HeldAcc}}</td><td>{{.HeldKappa}}</td><td></td><td></td></tr>
{{range .Rows}}<tr><th>{{.Name}}</th><td>{{.Level}}</td><td>{{.N}}</td><td>{{.Acc}}</td><td>{{.Kappa}}</td><td>{{.R}}</td><td>{{.MAD}}</td></tr>
{{end}}</table></div>
{{range .Notes}}<p class="muted">{{.}}</p>{{end}}
<details><summary>Every comparison: confusion matrices, roll-ups and scatter plots</summary>
{{.Detail}}
</details>
`))

type codingsRow struct {
	Name, Level, Acc, Kappa, R, MAD string
	N                               int
}

// codingsSection renders Codings (nil: no section).
func (r *Report) codingsSection() (template.HTML, error) {
	c := r.Codings
	if c == nil || len(c.Comparisons) == 0 {
		return "", nil
	}
	detail, err := c.HTML()
	if err != nil {
		return "", err
	}
	data := struct {
		Held      Agreement
		HeldAcc   string
		HeldKappa string
		Rows      []codingsRow
		Notes     []string
		Detail    template.HTML
	}{Held: r.Agreement, Detail: detail, Notes: c.Notes}
	data.HeldAcc, data.HeldKappa = "no estimate yet: no held-out item counts", ""
	if r.Agreement.N > 0 {
		data.HeldAcc, data.HeldKappa = iv(r.Agreement.Accuracy), iv(r.Agreement.Kappa)
	}
	cell := func(e compare.Estimate) string {
		if !e.Defined {
			return "no estimate yet"
		}
		return e.String()
	}
	for _, cmp := range c.Comparisons {
		name := cmp.A + " vs " + cmp.B
		if it := cmp.Items; it != nil {
			data.Rows = append(data.Rows, codingsRow{Name: name, Level: "items", N: it.N, Acc: cell(it.Accuracy), Kappa: cell(it.Kappa)})
		}
		for _, p := range cmp.Parents {
			data.Rows = append(data.Rows, codingsRow{Name: name, Level: "parents: " + p.Label, N: p.N, R: cell(p.Pearson), MAD: cell(p.MAD)})
		}
		if cmp.Items == nil && len(cmp.Parents) == 0 {
			why := cmp.ItemsNote
			if why == "" {
				why = cmp.ParentsNote
			}
			data.Notes = append(data.Notes, fmt.Sprintf("%s: %s", name, strings.TrimPrefix(why, "no estimate yet: ")))
		}
	}
	var b strings.Builder
	if err := codingsTmpl.Execute(&b, data); err != nil {
		return "", err
	}
	return template.HTML(b.String()), nil
}
