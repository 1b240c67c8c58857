package main

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"
	"testing"
)

// A project of 12 reports with 3 sentences each, two crowd waves and
// expert codings, through the commands.
func compareProject(t *testing.T) (proj, dir string) {
	t.Helper()
	dir = t.TempDir()
	proj = filepath.Join(dir, "proj")
	cb := write(t, dir, "codebook.yaml", codebookYAML)
	mustLoop(t, "init", proj, "--codebook", cb, "--quiet")
	classes := []string{"pollution", "wildlife", "other"}
	var items, w1, w2, experts, shares strings.Builder
	items.WriteString("id,text,parent\n")
	w1.WriteString("item,annotator,label\n")
	w2.WriteString("item,annotator,label\n")
	experts.WriteString("item,label\n")
	shares.WriteString("parent,question,value\n")
	for g := range 12 {
		pol := 0
		for j := range 3 {
			id := fmt.Sprintf("r%02d-%d", g, j)
			c := (g + j*g/4) % 3
			if c == 0 {
				pol++
			}
			fmt.Fprintf(&items, "%s,Sentence %d of report %d.,rep%02d\n", id, j, g, g)
			for a := range 3 {
				fmt.Fprintf(&w1, "%s,a%d,%s\n", id, a, classes[c])
				// Wave 2: two annotators of three answer otherwise
				// on every fourth sentence.
				c2 := c
				if a < 2 && (g*3+j)%4 == 0 {
					c2 = (c + 1) % 3
				}
				fmt.Fprintf(&w2, "%s,b%d,%s\n", id, a, classes[c2])
			}
			fmt.Fprintf(&experts, "%s,%s\n", id, classes[c])
		}
		fmt.Fprintf(&shares, "rep%02d,pollution,%.3f\n", g, float64(pol)/3)
	}
	mustLoop(t, "items", "add", proj, write(t, dir, "items.csv", items.String()))
	mustLoop(t, "labels", "add", proj, write(t, dir, "w1.csv", w1.String()))
	mustLoop(t, "labels", "add", proj, write(t, dir, "w2.csv", w2.String()), "--wave", "2")
	write(t, dir, "experts.csv", experts.String())
	write(t, dir, "shares.csv", shares.String())
	return proj, dir
}

func TestReferenceAddAndCompare(t *testing.T) {
	proj, dir := compareProject(t)
	bad := []struct {
		name, file, text string
		code             int
		want             string
	}{
		{"bad class", "bad1.csv", "item,label\nr00-0,pollution\nr00-1,oil\n", 1, `bad1.csv:3: field "label": label "oil" is not in the codebook`},
		{"unknown item", "bad2.csv", "item,label\nr00-0,pollution\nnope,other\n", 1, `bad2.csv:3: field "item": unknown item "nope"`},
		{"unknown parent", "bad3.jsonl", "{\"parent\":\"rep00\",\"value\":0.5,\"question\":\"other\"}\n{\"parent\":\"rep99\",\"value\":0.5,\"question\":\"other\"}\n", 1, `bad3.jsonl:2: field "parent": no item has the parent "rep99"`},
		{"share above 1", "bad4.csv", "parent,question,value\nrep00,other,33\n", 1, `bad4.csv:2: field "value": value 33 is outside [0, 1]`},
		{"position on a nominal codebook", "bad5.csv", "parent,value\nrep00,2\n", 1, `field "question"`},
		{"not a table", "bad6.txt", "item,label\n", 2, "use a .csv or .jsonl file"},
	}
	for _, b := range bad {
		code, _, errs := loop(t, "reference", "add", proj, write(t, dir, b.file, b.text), "--name", "x")
		if code != b.code || !strings.Contains(errs, b.want) {
			t.Errorf("%s: exit %d, %q; want exit %d and %q", b.name, code, errs, b.code, b.want)
		}
	}
	if code, _, errs := loop(t, "reference", "add", proj, filepath.Join(dir, "experts.csv"), "--name", "bad name"); code != 2 || !strings.Contains(errs, "letters, digits") {
		t.Errorf("bad name: exit %d %s", code, errs)
	}
	if out := mustLoop(t, "reference", "list", proj); !strings.Contains(out, "no reference codings yet") {
		t.Fatalf("bad files changed the project:\n%s", out)
	}
	if out := mustLoop(t, "reference", "add", proj, filepath.Join(dir, "experts.csv"), "--name", "experts-2019"); !strings.Contains(out, "reference experts-2019: 36 item labels from experts.csv") {
		t.Errorf("add: %s", out)
	}
	mustLoop(t, "reference", "add", proj, filepath.Join(dir, "shares.csv"), "--name", "shares")
	if code, _, errs := loop(t, "reference", "add", proj, filepath.Join(dir, "shares.csv"), "--name", "shares"); code != 1 || !strings.Contains(errs, "--replace") {
		t.Errorf("same name again: exit %d %s", code, errs)
	}
	list := mustLoop(t, "reference", "list", proj)
	if !strings.Contains(list, "experts-2019  items") || !strings.Contains(list, "shares        parents  12") {
		t.Errorf("list:\n%s", list)
	}
	out := mustLoop(t, "compare", proj, "--reps", "200")
	for _, want := range []string{"crowd consensus (all waves) vs experts-2019", "accuracy                        1.000",
		"machine vs experts-2019", "no estimate yet: no round has scored", "crowd consensus (all waves) vs shares", "share of pollution",
		"wave 1 vs wave 2", "Krippendorff's alpha (nominal)", "confusion matrix (rows: wave 1, columns: wave 2)"} {
		if !strings.Contains(out, want) {
			t.Errorf("compare lacks %q:\n%s", want, out)
		}
	}
	var rep struct {
		Comparisons []struct {
			Kind, A, B string
			Items      *struct {
				N     int
				Kappa struct{ Value, Lo, Hi float64 }
			}
		}
	}
	js := mustLoop(t, "compare", proj, "--reference", "experts-2019", "--waves", "1,2", "--reps", "200", "--json")
	if err := json.Unmarshal([]byte(js), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Comparisons) != 3 || rep.Comparisons[2].Kind != "waves" || rep.Comparisons[2].Items.N != 36 || rep.Comparisons[2].Items.Kappa.Value >= 1 {
		t.Errorf("json: %s", js)
	}
	html := filepath.Join(dir, "cmp.html")
	mustLoop(t, "compare", proj, "--reps", "100", "--html", html, "--quiet")
	for _, bad := range [][]string{{"--waves", "1"}, {"--waves", "1,x"}} {
		if code, _, _ := loop(t, append([]string{"compare", proj}, bad...)...); code != 2 {
			t.Errorf("compare %v: exit %d, want 2", bad, code)
		}
	}
	if code, _, errs := loop(t, "compare", proj, "--waves", "1,3"); code != 1 || !strings.Contains(errs, "wave 3 has no labels") {
		t.Errorf("wave without labels: exit %d %s", code, errs)
	}
	if code, _, errs := loop(t, "compare", proj, "--reference", "nope"); code != 1 || !strings.Contains(errs, "experts-2019, shares") {
		t.Errorf("unknown reference: exit %d %s", code, errs)
	}
	w := mustLoop(t, "waves", proj)
	if !strings.Contains(w, "1     108     36     open") || !strings.Contains(w, "2     108     36") {
		t.Errorf("waves:\n%s", w)
	}
	mustLoop(t, "waves", proj, "--open", "--quiet")
	if w := mustLoop(t, "waves", proj); !strings.Contains(w, "3     0       0      open") {
		t.Errorf("after --open:\n%s", w)
	}
	if code, _, _ := loop(t, "labels", "add", proj, filepath.Join(dir, "w1.csv"), "--wave", "0"); code != 2 {
		t.Errorf("--wave 0: exit %d, want 2", code)
	}
}
