package verdict

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"regexp"
	"strings"
	"testing"
	"unicode"

	"golang.org/x/net/html"
)

// htmlReport builds a report from sample data and renders it. With hard
// set, the data puts something in every corner a fixed legend could take:
// an overconfident model (reliability points at the bottom right),
// annotators spread over the whole kappa range, a compared curve above
// this project's.
func htmlReport(t *testing.T, classes []string, annotators int, hard bool) (*Report, string) {
	t.Helper()
	in := sample(1, 1500, classes)
	if hard {
		r := rand.New(rand.NewPCG(4, 4))
		for i := range in.Proba {
			// Confident and often wrong at the top: true class only
			// 60% of the time at confidence 0.9–0.99.
			c := 0.9 + 0.09*r.Float64()
			pred := in.Truth[i]
			if r.Float64() > 0.6 {
				pred = (pred + 1) % len(classes)
			}
			for j := range in.Proba[i] {
				in.Proba[i][j] = (1 - c) / float64(len(classes)-1)
			}
			in.Proba[i][pred] = c
		}
	}
	for i := 0; i < annotators; i++ {
		k := 0.2 + 0.75*float64(i)/math.Max(1, float64(annotators-1))
		in.Annotators = append(in.Annotators, Annotator{fmt.Sprintf("ann%02d", i), k, 0.5 + k/2, 90 + 7*i})
	}
	stop := make([]int, 300)
	in.StopSet = [][]int{stop, stop, stop}
	for _, n := range []int{120, 250, 500, 900, 1400, 2100} {
		in.Curve = append(in.Curve, CurvePoint{n, 0.9*math.Pow(float64(n), -0.4) + 0.02})
	}
	in.Compare = &Series{Name: "random picks", Points: []CurvePoint{{120, 0.45}, {250, 0.4}, {500, 0.36}, {900, 0.33}, {1400, 0.31}, {2100, 0.3}}}
	rep, err := Compute(in, Options{Seed: 3, Bootstrap: 200, TargetError: 0.05})
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := rep.WriteHTML(&b, ""); err != nil {
		t.Fatal(err)
	}
	return rep, b.String()
}

var tenClasses = []string{"water-quality", "bank-erosion", "wildlife-sighting", "litter-and-dumping", "flooding",
	"footpath-damage", "invasive-plants", "fishing", "noise-complaint", "something-else"}

// The plots of the report, each found by one of its axis labels.
var plotLabels = map[string]string{
	"coverage and risk": "coverage (share of held-out items at or above the threshold)",
	"reliability":       "mean confidence in bin",
	"learning curve":    "labels spent",
	"annotators":        "Cohen's kappa against the leave-one-out consensus",
}

// dataPath reports whether a path draws data or a reference line: anything
// but the white background, the light grid and the dark axes and ticks.
func dataPath(p svgPath) bool {
	for _, c := range []string{p.has("stroke"), p.has("fill")} {
		switch c {
		case "", "NONE", "#FFFFFF", "#E4E4E4", "#1F2328":
		default:
			return true
		}
	}
	return false
}

// TestReportTextCoversNoData: no text drawn in a plot — legend entries,
// tick labels, axis labels, counts — lies over a data point or a line, on
// data that fills every corner of the plots.
func TestReportTextCoversNoData(t *testing.T) {
	for _, hard := range []bool{false, true} {
		_, page := htmlReport(t, []string{"a", "b", "c"}, 12, hard)
		for name, label := range plotLabels {
			d := plotWith(t, page, label)
			for _, tx := range d.texts {
				for _, p := range d.paths {
					if dataPath(p) && p.crosses(tx.box) {
						t.Errorf("hard data %v, %s plot: the text %q covers a line or point drawn in %s", hard, name, tx.s, p.style)
						break
					}
				}
			}
		}
	}
}

// key returns the entries of the HTML key of the figure with the given id.
func key(t *testing.T, page, id string) []string {
	t.Helper()
	i := strings.Index(page, `<figure id="`+id+`"`)
	if i < 0 {
		t.Fatalf("no figure %s", id)
	}
	fig := page[i : i+strings.Index(page[i:], "</figure>")]
	var out []string
	for _, m := range regexp.MustCompile(`(?s)<li>(.*?)</li>`).FindAllStringSubmatch(fig, -1) {
		out = append(out, strings.TrimSpace(regexp.MustCompile(`<[^>]*>`).ReplaceAllString(m[1], "")))
	}
	return out
}

// TestReportMaxErrorAndThreshold: on the coverage–risk plot the max-error
// line (horizontal) and the chosen threshold (vertical) differ in colour
// and in dash pattern, so that they are told apart in grey too, and the
// key names both.
func TestReportMaxErrorAndThreshold(t *testing.T) {
	rep, page := htmlReport(t, []string{"a", "b", "c"}, 6, false)
	if !rep.Threshold.Found {
		t.Fatal("the sample found no threshold")
	}
	d := plotWith(t, page, plotLabels["coverage and risk"])
	var horiz, vert []svgPath
	for _, p := range d.paths {
		if !dataPath(p) || len(p.pts) != 2 {
			continue
		}
		a, b := p.pts[0], p.pts[1]
		switch {
		case math.Abs(a[1]-b[1]) < 0.01 && math.Abs(a[0]-b[0]) > 0.5*d.w:
			horiz = append(horiz, p)
		case math.Abs(a[0]-b[0]) < 0.01 && math.Abs(a[1]-b[1]) > 0.2*d.h:
			vert = append(vert, p)
		}
	}
	if len(horiz) != 1 || len(vert) != 1 {
		t.Fatalf("want one max-error line and one threshold line drawn as data, found %d horizontal and %d vertical", len(horiz), len(vert))
	}
	h, v := horiz[0], vert[0]
	if h.has("stroke") == v.has("stroke") || h.has("stroke-dasharray") == v.has("stroke-dasharray") {
		t.Errorf("max-error drawn as %q, the threshold as %q: want both colour and dashes to differ", h.style, v.style)
	}
	k := strings.Join(key(t, page, "fig-risk"), " | ")
	if !strings.Contains(k, "max-error 5%") || !strings.Contains(k, fmt.Sprintf("chosen threshold %.3g", rep.Threshold.Threshold)) {
		t.Errorf("the key of the coverage–risk plot: %s", k)
	}
}

// TestReportConfusionOnce: one confusion matrix (a table, no second copy as
// a plot), with a key to its shades, and columns that stay narrow for ten
// classes with long names: numbered, the numbers given beside the row names.
func TestReportConfusionOnce(t *testing.T) {
	for _, classes := range [][]string{tenClasses, {"water", "banks", "other"}} {
		_, page := htmlReport(t, classes, 4, false)
		if n := strings.Count(page, `<table class="confusion"`); n != 1 {
			t.Errorf("%d classes: %d confusion tables", len(classes), n)
		}
		for _, s := range svgs(page) {
			if strings.Contains(s, ">machine class<") || strings.Contains(s, ">consensus class<") {
				t.Errorf("%d classes: the confusion matrix is also drawn as a plot", len(classes))
			}
		}
		i := strings.Index(page, `id="confusion-key"`)
		if i < 0 || !strings.Contains(page[i:i+800], "0%") || !strings.Contains(page[i:i+800], "100%") || !strings.Contains(page[i:i+800], "linear-gradient") {
			t.Errorf("%d classes: no colour key from 0%% to 100%% beside the confusion matrix", len(classes))
		}
		doc, err := html.Parse(strings.NewReader(page))
		if err != nil {
			t.Fatal(err)
		}
		tab := find(doc, func(n *html.Node) bool { return n.Data == "table" && attr(n, "class") == "confusion" })
		if tab == nil {
			t.Fatalf("%d classes: no confusion table", len(classes))
		}
		rows := findAll(tab, func(n *html.Node) bool { return n.Data == "tr" })
		head := findAll(rows[0], func(n *html.Node) bool { return n.Data == "th" })[1:]
		if len(head) != len(classes) || len(rows) != len(classes)+1 {
			t.Fatalf("%d classes: %d columns, %d rows", len(classes), len(head), len(rows)-1)
		}
		for c, th := range head {
			col := textOf(th)
			row := textOf(findAll(rows[c+1], func(n *html.Node) bool { return n.Data == "th" })[0])
			if len(classes) == 10 {
				if col != fmt.Sprint(c+1) || row != fmt.Sprintf("%d %s", c+1, classes[c]) || attr(th, "title") != classes[c] {
					t.Errorf("10 classes, column %d: header %q (title %q), row %q", c, col, attr(th, "title"), row)
				}
			} else if col != classes[c] || row != classes[c] {
				t.Errorf("3 short classes, column %d: header %q, row %q; want the names", c, col, row)
			}
		}
	}
}

// TestReportReliabilityCounts: the reliability diagram shows how many
// items fall in each bin, as bars on an axis of whole numbers and in a
// table with the exact counts.
func TestReportReliabilityCounts(t *testing.T) {
	rep, page := htmlReport(t, []string{"a", "b", "c"}, 4, false)
	d := plotWith(t, page, plotLabels["reliability"])
	if !hasText(d, "items in bin") {
		t.Error("the reliability diagram has no axis of items per bin")
	}
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	tab := find(doc, func(n *html.Node) bool { return n.Data == "table" && attr(n, "id") == "bins" })
	if tab == nil {
		t.Fatal("no table of the bins")
	}
	got := textOf(tab)
	for _, b := range rep.Calibration.Bins {
		if b.N > 0 && !strings.Contains(got, " "+commas(b.N)) {
			t.Errorf("bin [%.2f, %.2f) with %d items: not in the table %q", b.Lo, b.Hi, b.N, got)
		}
	}
	var bars int
	for _, p := range d.paths {
		if p.has("fill") != "" && p.has("fill") != "NONE" && dataPath(p) {
			bars++
		}
	}
	nonEmpty := 0
	for _, b := range rep.Calibration.Bins {
		if b.N > 0 {
			nonEmpty++
		}
	}
	if bars < nonEmpty {
		t.Errorf("%d filled bars for %d non-empty bins", bars, nonEmpty)
	}
}

// TestReportAnnotatorAxis: the annotator plot has a y axis — a line and a
// label — with the names when they fit and ranks (whole numbers) when not.
func TestReportAnnotatorAxis(t *testing.T) {
	for _, n := range []int{12, 60} {
		_, page := htmlReport(t, []string{"a", "b", "c"}, n, false)
		d := plotWith(t, page, plotLabels["annotators"])
		var label bool
		for _, tx := range d.texts {
			if tx.rot && strings.Contains(tx.s, "annotator") {
				label = true
			}
		}
		if !label {
			t.Errorf("%d annotators: no y axis label", n)
		}
		var axis bool
		for _, p := range d.paths {
			if p.has("stroke") == "#1F2328" && len(p.pts) == 2 && math.Abs(p.pts[0][0]-p.pts[1][0]) < 0.01 && math.Abs(p.pts[0][1]-p.pts[1][1]) > 0.5*d.h {
				axis = true
			}
		}
		if !axis {
			t.Errorf("%d annotators: no y axis line", n)
		}
		if n == 12 && !hasText(d, "ann00") {
			t.Errorf("12 annotators: the names are not on the axis")
		}
		if n == 60 {
			ticks := leftColumn(d)
			if len(ticks) < 3 {
				t.Errorf("60 annotators: %d rank ticks", len(ticks))
			}
			for _, s := range ticks {
				if !regexp.MustCompile(`^[1-9][0-9]*$`).MatchString(s) {
					t.Errorf("60 annotators: rank tick %q is not a whole number", s)
				}
			}
		}
	}
}

// TestReportCountTicks: an axis that counts (labels spent, items in a bin)
// is ticked with whole numbers with thousands separators, never "250.00";
// an axis of shares gives every tick the same number of decimals.
func TestReportCountTicks(t *testing.T) {
	_, page := htmlReport(t, []string{"a", "b", "c"}, 4, false)
	whole := regexp.MustCompile(`^[0-9]{1,3}(,[0-9]{3})*$`)
	for name, check := range map[string]func(svgDoc) []string{"learning curve": bottomRow, "reliability": func(d svgDoc) []string { return leftColumnBelow(d, textY(d, plotLabels["reliability"])) }} {
		d := plotWith(t, page, plotLabels[name])
		ticks := check(d)
		if len(ticks) < 2 {
			t.Errorf("%s: %d count ticks: %v", name, len(ticks), ticks)
		}
		for _, s := range ticks {
			if !whole.MatchString(s) {
				t.Errorf("%s: count tick %q is not a whole number", name, s)
			}
		}
	}
	d := plotWith(t, page, plotLabels["coverage and risk"])
	for _, ticks := range [][]string{bottomRow(d), leftColumn(d)} {
		dec := -1
		for _, s := range ticks {
			_, frac, _ := strings.Cut(s, ".")
			if dec >= 0 && len(frac) != dec {
				t.Errorf("coverage and risk: ticks %v have different numbers of decimals", ticks)
				break
			}
			dec = len(frac)
		}
	}
}

// TestReportNoDoubledWords: no word or pair of words is said twice in a
// row anywhere on the page (a heading and the title under it, a note and
// the message it quotes).
func TestReportNoDoubledWords(t *testing.T) {
	in := sample(5, 400, []string{"a", "b"})
	in.Curve = []CurvePoint{{100, 0.3}, {0, 0.2}} // a bad point: the fit reports it
	rep, err := Compute(in, Options{Bootstrap: 50})
	if err != nil {
		t.Fatal(err)
	}
	if rep.FitError == "" {
		t.Fatal("the bad curve point did not stop the fit")
	}
	var b bytes.Buffer
	if err := rep.WriteHTML(&b, ""); err != nil {
		t.Fatal(err)
	}
	_, page := htmlReport(t, []string{"a", "b", "c"}, 5, false)
	for _, p := range []string{b.String(), page} {
		doc, err := html.Parse(strings.NewReader(p))
		if err != nil {
			t.Fatal(err)
		}
		if d := doubled(visible(doc)); d != "" {
			t.Errorf("doubled: %q", d)
		}
	}
}

// doubled returns the first word or pair of words repeated at once
// ("the the", "learning curve: learning curve"), ignoring case, punctuation
// and numbers, or "".
func doubled(s string) string {
	var w []string
	for _, f := range strings.FieldsFunc(strings.ToLower(s), func(r rune) bool { return !unicode.IsLetter(r) && !unicode.IsDigit(r) && r != '\'' }) {
		w = append(w, f)
	}
	word := func(x string) bool { return strings.IndexFunc(x, unicode.IsLetter) >= 0 && len(x) > 1 }
	for i := range w {
		if i+1 < len(w) && w[i] == w[i+1] && word(w[i]) {
			return w[i] + " " + w[i+1]
		}
		if i+3 < len(w) && w[i] == w[i+2] && w[i+1] == w[i+3] && word(w[i]) && word(w[i+1]) {
			return strings.Join(w[i:i+4], " ")
		}
	}
	return ""
}

func TestDoubled(t *testing.T) {
	for s, want := range map[string]string{
		"Learning curve\nLearning curve":            "learning curve learning curve",
		"learning curve: learning curve point 1: 0": "learning curve learning curve",
		"the the end":                        "the the",
		"rounds 0→1 1→2 kappa 1.0000 1.0000": "",
		"a b a b":                            "",
		"water banks other water 144 3 5 banks 2 130 4": "",
	} {
		if got := doubled(s); got != want {
			t.Errorf("doubled(%q) = %q, want %q", s, got, want)
		}
	}
}

// visible is the text a reader sees: every text node outside <style>, with
// element boundaries as spaces (SVG text included).
func visible(n *html.Node) string {
	var b strings.Builder
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && (n.Data == "style" || n.Data == "script" || n.Data == "title" && n.Parent != nil && n.Parent.Data == "head") {
			return
		}
		if n.Type == html.TextNode {
			b.WriteString(n.Data)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
		if n.Type == html.ElementNode {
			b.WriteString(" ")
		}
	}
	walk(n)
	return b.String()
}

func find(n *html.Node, ok func(*html.Node) bool) *html.Node {
	if all := findAll(n, ok); len(all) > 0 {
		return all[0]
	}
	return nil
}

func findAll(n *html.Node, ok func(*html.Node) bool) []*html.Node {
	var out []*html.Node
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.ElementNode && ok(n) {
			out = append(out, n)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(n)
	return out
}

func attr(n *html.Node, name string) string {
	for _, a := range n.Attr {
		if a.Key == name {
			return a.Val
		}
	}
	return ""
}

func textOf(n *html.Node) string { return strings.Join(strings.Fields(visible(n)), " ") }

func hasText(d svgDoc, s string) bool {
	for _, t := range d.texts {
		if t.s == s {
			return true
		}
	}
	return false
}

var tickNumber = regexp.MustCompile(`^−?-?[0-9][0-9,]*(\.[0-9]+)?$`)

// bottomRow returns the numeric texts on the lowest row of numbers of the
// plot: the x axis's tick labels.
func bottomRow(d svgDoc) []string {
	y := math.Inf(-1)
	for _, t := range d.texts {
		if !t.rot && tickNumber.MatchString(t.s) {
			y = math.Max(y, t.y)
		}
	}
	var out []string
	for _, t := range d.texts {
		if !t.rot && tickNumber.MatchString(t.s) && math.Abs(t.y-y) < 0.5 {
			out = append(out, t.s)
		}
	}
	return out
}

// leftColumn returns the numeric or name texts ending furthest left of the
// plot area: the y axis's tick labels (right-aligned at one x).
func leftColumn(d svgDoc) []string { return leftColumnBelow(d, 0) }

// textY is the baseline of the text s on the figure (+Inf if absent).
func textY(d svgDoc, s string) float64 {
	for _, t := range d.texts {
		if t.s == s {
			return t.y
		}
	}
	return math.Inf(1)
}

// leftColumnBelow is leftColumn for the y axis of the panel below the
// given height on the figure (0: the whole figure).
func leftColumnBelow(d svgDoc, y0 float64) []string {
	right := map[int][]string{}
	best, bestN := 0, 0
	for _, t := range d.texts {
		if t.rot || !tickNumber.MatchString(t.s) || t.y < y0 {
			continue
		}
		x := int(math.Round(t.box.x1))
		right[x] = append(right[x], t.s)
		if len(right[x]) > bestN || len(right[x]) == bestN && x < best {
			best, bestN = x, len(right[x])
		}
	}
	return right[best]
}
