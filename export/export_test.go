package export

import (
	"bytes"
	"encoding/csv"
	"math"
	"strings"
	"testing"

	"handoff/internal/testproject"
	"handoff/round"
	"handoff/sim"
)

// TestSafeCells checks the CSV cells that spreadsheet programs would run as
// formulas (the OWASP guidance on CSV injection lists =, +, -, @, tab and
// carriage return as the dangerous first characters): each gets a leading
// single quote; plain numbers and other text are left alone.
func TestSafeCells(t *testing.T) {
	cases := []struct{ in, want string }{
		{"=HYPERLINK(\"http://x\",\"y\")", "'=HYPERLINK(\"http://x\",\"y\")"},
		{"+1+cmd|' /C calc'!A0", "'+1+cmd|' /C calc'!A0"},
		{"-2+3", "'-2+3"},
		{"@SUM(A1:A9)", "'@SUM(A1:A9)"},
		{"\t=1", "'\t=1"},
		{"\r=1", "'\r=1"},
		{"-3.5", "-3.5"},
		{"+1e-3", "+1e-3"},
		{"-.5", "-.5"},
		{"0.25", "0.25"},
		{"plain text", "plain text"},
		{"a=b", "a=b"},
		{"", ""},
		{"-", "'-"},
		{"-Inf", "'-Inf"},
	}
	for _, c := range cases {
		if got := SafeCells([]string{c.in})[0]; got != c.want {
			t.Errorf("SafeCells(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

// TestExportCSVFormulaSafe writes an export whose item id, parent and
// covariate start with formula characters: the CSV cells are prefixed, the
// JSON lines export keeps the values as they are.
func TestExportCSVFormulaSafe(t *testing.T) {
	rows := []Row{{Item: "=cmd|' /C calc'!A0", Kind: "text", Class: "a", Source: "crowd", Confidence: 0.9, Posterior: []float64{0.9, 0.1},
		Labels: 3, Parent: "@doc", Covariates: map[string]string{"note": "+danger", "lat": "-33.9"}}}
	var buf bytes.Buffer
	if err := Write(&buf, "csv", rows, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head, rec := recs[0], recs[1]
	get := func(col string) string {
		for i, h := range head {
			if h == col {
				return rec[i]
			}
		}
		t.Fatalf("no column %s in %v", col, head)
		return ""
	}
	for col, want := range map[string]string{"item": "'=cmd|' /C calc'!A0", "parent": "'@doc", "cov_note": "'+danger", "cov_lat": "-33.9", "p_a": "0.9"} {
		if got := get(col); got != want {
			t.Errorf("%s = %q, want %q", col, got, want)
		}
	}
	buf.Reset()
	if err := Write(&buf, "jsonl", rows, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), `"item":"=cmd|' /C calc'!A0"`) {
		t.Errorf("the JSON lines export changed the item id: %s", buf.String())
	}
}

// TestRowsProvenance runs a round on an invented project, autolabels it
// (forced: its verdict is NOT YET) and exports it: machine rows carry their
// model and round, crowd rows are there, and every format writes.
func TestRowsProvenance(t *testing.T) {
	st, _ := testproject.Small(t, t.TempDir(), 5)
	cfg := round.DefaultConfig()
	cfg.Verdict.Bootstrap = 100
	if _, err := round.Run(st, cfg, "test"); err != nil {
		t.Fatal(err)
	}
	rep, err := round.Autolabel(st, round.AutolabelConfig{Force: true, Threshold: 0.9}, "test")
	if err != nil {
		t.Fatal(err)
	}
	rows, err := Rows(st)
	if err != nil {
		t.Fatal(err)
	}
	src := map[string]int{}
	for _, r := range rows {
		src[r.Source]++
		if r.Source == "machine" && (r.Model == "" || r.Round == 0) {
			t.Fatalf("machine row without provenance: %+v", r)
		}
	}
	if src["machine"] != rep.Labelled || src["crowd"] == 0 {
		t.Fatalf("export sources %v, want %d machine rows", src, rep.Labelled)
	}
	for _, f := range []string{"csv", "jsonl", "parquet"} {
		var buf bytes.Buffer
		if err := Write(&buf, f, rows, sim.TopicCodebook().Keys()); err != nil || buf.Len() == 0 {
			t.Fatalf("export %s: %v", f, err)
		}
	}
	if err := Write(&bytes.Buffer{}, "xlsx", rows, nil); err == nil {
		t.Error("an unknown format wrote")
	}
}

func TestRollupIntervals(t *testing.T) {
	// Parent a: 3 of 4 items class x; parent b: all y. Shares are exact,
	// intervals are exact binomial ones (scipy 1.10 beta.ppf, two-sided
	// 95%: 3 of 4 → [0.19412, 0.99369]; 2 of 2 → [0.15811, 1]) and never
	// collapse to a point.
	rows := []Row{
		{Item: "1", Parent: "a", Class: "x"}, {Item: "2", Parent: "a", Class: "x"},
		{Item: "3", Parent: "a", Class: "x"}, {Item: "4", Parent: "a", Class: "y"},
		{Item: "5", Parent: "b", Class: "y"}, {Item: "6", Parent: "b", Class: "y"},
		{Item: "7", Parent: "b"},
	}
	ps, err := Rollup(rows, []string{"x", "y"}, true, RollupConfig{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 2 || ps[0].Parent != "a" || ps[1].Items != 3 || ps[1].Answered != 2 {
		t.Fatalf("rollup %+v", ps)
	}
	a := ps[0].Shares[0]
	if math.Abs(a.Value-0.75) > 1e-12 || math.Abs(a.Lo-0.19412) > 1e-4 || math.Abs(a.Hi-0.99369) > 1e-4 {
		t.Errorf("share of x in a: %+v", a)
	}
	if b := ps[1].Shares[1]; b.Value != 1 || math.Abs(b.Lo-0.15811) > 1e-4 || b.Hi != 1 {
		t.Errorf("share of y in b: %+v", b)
	}
	if b := ps[1].Shares[0]; b.Value != 0 || b.Lo != 0 || !(b.Hi > 0.8) {
		t.Errorf("share of x in b (0 of 2): %+v", b)
	}
	if p := ps[0].Position; p == nil || math.Abs(p.Value-1.25) > 1e-12 {
		t.Errorf("mean position in a: %+v", p)
	}
}
