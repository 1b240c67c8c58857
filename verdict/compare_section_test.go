package verdict

import (
	"bytes"
	"strings"
	"testing"

	"handoff/compare"
)

// With independent codings attached, the report shows the machine against
// the crowd beside the crowd against the codings; without, no section.
func TestCodingsSection(t *testing.T) {
	rep, err := Compute(sample(4, 400, []string{"a", "b"}), Options{Bootstrap: 50})
	if err != nil {
		t.Fatal(err)
	}
	var plain bytes.Buffer
	if err := rep.WriteHTML(&plain, ""); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(plain.String(), "independent codings") {
		t.Errorf("a report without codings has the section")
	}
	x := []int{0, 1, 1, 0, 1, 0, 0, 1, 1, 0, 1, 1}
	y := []int{0, 1, 0, 0, 1, 0, 1, 1, 1, 0, 1, 1}
	opt := compare.Options{Bootstrap: compare.Bootstrap{Reps: 100}}
	names := []string{"d1", "d2", "d3"}
	rep.Codings = &compare.Report{Classes: []string{"a", "b"}, Comparisons: []compare.Comparison{
		{Kind: "reference", A: "crowd consensus", B: "experts-2019", Items: compare.CompareItems(x, y, 2, compare.Nominal, opt),
			Parents: []compare.Parents{compare.CompareParents("b", "share of b", 0, 1, names, []float64{.2, .5, .9}, []float64{.25, .4, .8}, opt)}},
		{Kind: "machine", A: "machine", B: "experts-2019", ItemsNote: "no estimate yet: no round has scored the items yet"},
	}}
	var withC bytes.Buffer
	if err := rep.WriteHTML(&withC, ""); err != nil {
		t.Fatal(err)
	}
	h := withC.String()
	for _, want := range []string{"The crowd against independent codings", "machine vs crowd consensus (held-out reference standard)",
		"crowd consensus vs experts-2019", "parents: share of b", "no estimate yet", "machine vs experts-2019: no round has scored", "<svg"} {
		if !strings.Contains(h, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if i, j := strings.Index(h, "Agreement of machine and reference"), strings.Index(h, "independent codings"); i < 0 || j < i {
		t.Errorf("the codings section should follow the machine's agreement")
	}
}
