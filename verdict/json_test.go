package verdict

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"slices"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite testdata/verdict/json_fields.txt")

// fieldPaths lists every key path of a decoded JSON value ("a.b[].c").
func fieldPaths(prefix string, v any, out map[string]bool) {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			p := k
			if prefix != "" {
				p = prefix + "." + k
			}
			out[p] = true
			fieldPaths(p, e, out)
		}
	case []any:
		for _, e := range x {
			fieldPaths(prefix+"[]", e, out)
		}
	}
}

// TestJSONFieldsStable guards the documented JSON field names: a renamed or
// dropped field fails this test (the list in testdata/verdict is ours; run
// with -update after a deliberate change and say so in the changelog).
func TestJSONFieldsStable(t *testing.T) {
	in := sample(4, 400, []string{"a", "b"})
	in.Annotators = []Annotator{{"x", 0.7, 0.8, 10}, {"y", 0.6, 0.75, 12}}
	in.Unsettled = [][]float64{{0.9, 0.1}}
	in.Standard = &Standard{Level: 0.99, Cap: 9, Members: 500, Share: 0.2, Met: 400, Below: 1, Waiting: 99}
	in.Gold = &GoldCounts{Items: 40, Errors: 1}
	in.Stored = &StoredLabels{Model: "r1-a", Round: 1, Items: 10, Latest: "r2-b"}
	in.Run = []Setting{{"max-error", "0.05", "stored"}}
	in.StopSet = [][]int{{0, 1}, {0, 1}}
	in.Curve = []CurvePoint{{100, 0.3}, {200, 0.2}, {400, 0.15}, {800, 0.12}}
	in.Compare = &Series{Name: "random", Points: []CurvePoint{{100, 0.35}}}
	in.Audit = &AuditCounts{Items: 50, Errors: 2}
	rep, err := Compute(in, Options{Bootstrap: 50, TargetError: 0.11})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := rep.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(buf.String(), "NaN") || strings.Contains(buf.String(), "Inf") {
		t.Error("JSON holds a NaN or infinity")
	}
	var v any
	if err := json.Unmarshal(buf.Bytes(), &v); err != nil {
		t.Fatal(err)
	}
	set := map[string]bool{}
	fieldPaths("", v, set)
	var got []string
	for p := range set {
		got = append(got, p)
	}
	slices.Sort(got)
	const golden = "../testdata/verdict/json_fields.txt"
	if *update {
		if err := os.WriteFile(golden, []byte(strings.Join(got, "\n")+"\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	b, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	want := strings.Fields(string(b))
	if !slices.Equal(got, want) {
		for _, w := range want {
			if !set[w] {
				t.Errorf("JSON field %q is gone", w)
			}
		}
		for _, g := range got {
			if !slices.Contains(want, g) {
				t.Errorf("new JSON field %q: document it and run go test -update", g)
			}
		}
	}
}
