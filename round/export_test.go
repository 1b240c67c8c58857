package round

import (
	"bytes"
	"encoding/csv"
	"strings"
	"testing"
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
	if err := WriteRows(&buf, "csv", rows, []string{"a", "b"}); err != nil {
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
	if err := WriteRows(&buf, "jsonl", rows, []string{"a", "b"}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), `"item":"=cmd|' /C calc'!A0"`) {
		t.Errorf("the JSON lines export changed the item id: %s", buf.String())
	}
}
