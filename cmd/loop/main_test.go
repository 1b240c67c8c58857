package main

import (
	"bytes"
	"encoding/json"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"handoff/store"
)

// loop runs the real command tree in-process and returns the exit code,
// stdout and stderr.
func loop(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

func mustLoop(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := loop(t, args...)
	if code != 0 {
		t.Fatalf("loop %v: exit %d\n%s", args, code, errs)
	}
	return out
}

func write(t *testing.T, dir, name, data string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func writePNG(t *testing.T, path string) {
	t.Helper()
	var buf bytes.Buffer
	if err := png.Encode(&buf, image.NewGray(image.Rect(0, 0, 3, 3))); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll(filepath.Dir(path), 0o755)
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

const codebookYAML = "name: topic\nquestion: What is the report about?\nclasses:\n  - key: pollution\n  - key: wildlife\n  - key: other\n"

// newProject makes a project with three items, two labels and one gold.
func newProject(t *testing.T) (proj, dir string) {
	t.Helper()
	dir = t.TempDir()
	proj = filepath.Join(dir, "proj")
	cb := write(t, dir, "codebook.yaml", codebookYAML)
	mustLoop(t, "init", proj, "--codebook", cb, "--quiet")
	items := write(t, dir, "base.csv", "id,text,site\nr1,Oil on the water.,s1\nr2,A heron.,s2\nr3,Bags in the reeds.,s1\n")
	mustLoop(t, "items", "add", proj, items)
	labels := write(t, dir, "base_labels.csv", "item,annotator,label\nr1,ann,pollution\nr2,bob,wildlife\n")
	mustLoop(t, "labels", "add", proj, labels)
	gold := write(t, dir, "base_gold.csv", "item,label\nr3,other\n")
	mustLoop(t, "labels", "add", proj, gold, "--gold")
	return proj, dir
}

func TestBadInputChangesNothing(t *testing.T) {
	importChunk = 2 // so that bad records past the first chunk exercise the rollback
	defer func() { importChunk = 0 }()
	big := strings.Repeat("y", 1<<20+1)
	type tc struct {
		name  string
		files map[string]string // written into the temp dir
		args  []string          // after DIR; "@f" means the path of file f
		want  string            // regexp the error must match (file and line)
	}
	cases := []tc{
		{"malformed CSV", map[string]string{"items.csv": "id,text\na1,ok\na2,ok\na3,ok\na4,\"unclosed\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: malformed CSV`},
		{"malformed JSON", map[string]string{"items.jsonl": `{"id":"a1","text":"x"}` + "\n" + `{"id":"a2","text":"x"}` + "\n" + `{"id":"a3","text":"x"}` + "\n" + `{"id":"a4",` + "\n"}, []string{"items", "add", "@items.jsonl"}, `items\.jsonl:4: malformed JSON`},
		{"missing required column", map[string]string{"items.csv": "id,body\na,b\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:1: field "text": missing required column`},
		{"missing label column", map[string]string{"l.csv": "item,annotator\nr1,ann\n"}, []string{"labels", "add", "@l.csv"}, `l\.csv:1: field "label": missing required column`},
		{"duplicate item id (in project)", map[string]string{"items.csv": "id,text\nn1,a\nn2,b\nn3,c\nr2,dup\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: field "id": duplicate item id "r2"`},
		{"duplicate item id (in file)", map[string]string{"items.csv": "id,text\nn1,a\nn2,b\nn3,c\nn1,dup\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: field "id": duplicate item id "n1"`},
		{"duplicate across two files", map[string]string{"a.csv": "id,text\nn1,a\nn2,b\nn3,c\n", "b.jsonl": `{"id":"n2","text":"again"}`}, []string{"items", "add", "@a.csv", "@b.jsonl"}, `b\.jsonl:1: field "id": duplicate item id "n2"`},
		{"label not in codebook", map[string]string{"l.csv": "item,annotator,label\nr1,zed,pollution\nr2,zed,other\nr3,zed,other\nr1,zed,fish\n"}, []string{"labels", "add", "@l.csv"}, `l\.csv:5: field "label": label "fish" is not in the codebook`},
		{"label for unknown item", map[string]string{"l.csv": "item,annotator,label\nr1,zed,pollution\nr2,zed,other\nr3,zed,other\nr9,zed,other\n"}, []string{"labels", "add", "@l.csv"}, `l\.csv:5: field "item": unknown item "r9"`},
		{"gold for unknown item", map[string]string{"g.csv": "item,label\nr1,other\nr9,other\n"}, []string{"labels", "add", "@g.csv", "--gold"}, `g\.csv:3: field "item": unknown item "r9"`},
		{"gold not in codebook", map[string]string{"g.jsonl": `{"item":"r1","label":"fish"}`}, []string{"labels", "add", "@g.jsonl", "--gold"}, `g\.jsonl:1: field "label": label "fish"`},
		{"unreadable image", map[string]string{"imgs.txt": "ok1.png\nok2.png\nok3.png\nnot-there.png\n"}, []string{"items", "add", "@imgs.txt"}, `imgs\.txt:4: field "path": unreadable image`},
		{"corrupt image in a table", map[string]string{"imgs.csv": "path,mag\nok1.png,10\nbad.png,40\n", "bad.png": "GIF89a..."}, []string{"items", "add", "--format", "images", "@imgs.csv"}, `imgs\.csv:3: field "path": corrupt image`},
		{"corrupt image", map[string]string{"imgs.txt": "ok1.png\nok2.png\nok3.png\nbad.png\n", "bad.png": "\x89PNG\r\n\x1a\ngarbage"}, []string{"items", "add", "@imgs.txt"}, `imgs\.txt:4: field "path": corrupt image`},
		{"text not UTF-8", map[string]string{"items.csv": "id,text\nn1,a\nn2,b\nn3,c\nn4,caf\xe9\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: field "text": not UTF-8 text`},
		{"empty text", map[string]string{"items.jsonl": `{"id":"n1","text":"a"}` + "\n" + `{"id":"n2","text":"b"}` + "\n" + `{"id":"n3","text":"c"}` + "\n" + `{"id":"n4","text":" "}` + "\n"}, []string{"items", "add", "@items.jsonl"}, `items\.jsonl:4: field "text": empty text`},
		{"empty text after split", map[string]string{"items.csv": "id,text\nn1,One. Two.\nn2,\"\t\"\n"}, []string{"items", "add", "@items.csv", "--split", "sentences"}, `items\.csv:3: field "text": empty text`},
		{"field over 1 MB", map[string]string{"items.csv": "id,text\nn1,a\nn2,b\nn3,c\nn4," + big + "\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: field "text": field over 1 MB`},
		{"NaN covariate", map[string]string{"items.csv": "id,text,depth\nn1,a,1\nn2,b,2\nn3,c,3\nn4,d,NaN\n"}, []string{"items", "add", "@items.csv"}, `items\.csv:5: field "depth": covariate value "NaN" is not a finite number`},
		{"infinite covariate", map[string]string{"items.jsonl": `{"id":"n1","text":"a","depth":1}` + "\n" + `{"id":"n2","text":"b","depth":"+Inf"}` + "\n"}, []string{"items", "add", "@items.jsonl"}, `items\.jsonl:2: field "depth": covariate value "\+Inf"`},
		{"bad update still all-or-nothing", map[string]string{"items.csv": "id,text\nr1,changed\nr2,changed\nr3,changed\nn4,\n"}, []string{"items", "add", "@items.csv", "--update"}, `items\.csv:5: field "text": empty text`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			proj, dir := newProject(t)
			for _, f := range []string{"ok1.png", "ok2.png", "ok3.png"} {
				writePNG(t, filepath.Join(dir, f))
			}
			for name, data := range c.files {
				write(t, dir, name, data)
			}
			before := mustLoop(t, "status", proj, "--json")
			args := []string{c.args[0], c.args[1], proj}
			for _, a := range c.args[2:] {
				if strings.HasPrefix(a, "@") {
					a = filepath.Join(dir, a[1:])
				}
				args = append(args, a)
			}
			code, _, errs := loop(t, args...)
			if code != 1 {
				t.Fatalf("exit %d, want 1; stderr:\n%s", code, errs)
			}
			if !regexp.MustCompile(c.want).MatchString(errs) {
				t.Errorf("stderr %q\nwant it to match %q", errs, c.want)
			}
			if strings.Count(strings.TrimSpace(errs), "\n") != 0 {
				t.Errorf("error is not one line: %q", errs)
			}
			after := mustLoop(t, "status", proj, "--json")
			if after != before {
				t.Errorf("status changed:\nbefore %s\nafter %s", before, after)
			}
		})
	}
}

func statusOf(t *testing.T, proj string) store.Stats {
	t.Helper()
	var st store.Stats
	if err := json.Unmarshal([]byte(mustLoop(t, "status", proj, "--json")), &st); err != nil {
		t.Fatal(err)
	}
	return st
}

func TestImportRealData(t *testing.T) {
	dir := t.TempDir()
	cb := write(t, dir, "cb.yaml", codebookYAML)

	// Debian package descriptions (see testdata/README.md).
	proj := filepath.Join(dir, "pkg")
	mustLoop(t, "init", proj, "--codebook", cb)
	out := mustLoop(t, "items", "add", proj, "../../testdata/pkgdesc.jsonl")
	if !strings.Contains(out, "2210 added") {
		t.Errorf("pkgdesc: %s", out)
	}
	st := statusOf(t, proj)
	if st.Items != 2210 || st.ItemsByKind["text"] != 2210 {
		t.Errorf("pkgdesc status %+v", st)
	}

	// AppStream descriptions, split into sentences: one parent per app.
	proj = filepath.Join(dir, "app")
	mustLoop(t, "init", proj, "--codebook", cb)
	mustLoop(t, "items", "add", proj, "../../testdata/appdesc.jsonl", "--split", "sentences", "--covariates", "category,package")
	st = statusOf(t, proj)
	if st.Parents != 771 || st.Items <= 771 {
		t.Errorf("appdesc split: %d items, %d parents; want more items than the 771 apps, each a parent", st.Items, st.Parents)
	}
	s, err := store.Open(proj)
	if err != nil {
		t.Fatal(err)
	}
	it, _, err := s.Item("2048.desktop#1")
	s.Close()
	if err != nil || it.Parent != "2048.desktop" || it.Position != 1 || it.Covariates["category"] != "Game" || it.Covariates["summary"] != "" {
		t.Errorf("second sentence of 2048: %+v %v", it, err)
	}
	if !strings.HasPrefix(it.Text, "Touching tiles with the same value") {
		t.Errorf("second sentence text %q", it.Text)
	}

	// Dawid & Skene (1979) Table 1: 45 patients, 5 observers, 315 labels;
	// observer 1 rated each patient three times, the others once, so every
	// patient has 3 + 4 = 7 labels. Class counts are those of the table.
	proj = filepath.Join(dir, "ds")
	mustLoop(t, "init", proj, "--codebook", "../../testdata/ingest/ds1979_codebook.yaml")
	mustLoop(t, "items", "add", proj, "../../testdata/ingest/ds1979_items.csv")
	out = mustLoop(t, "labels", "add", proj, "../../testdata/ds1979.csv")
	if !strings.Contains(out, "315 added") {
		t.Errorf("ds1979: %s", out)
	}
	st = statusOf(t, proj)
	if st.Items != 45 || st.Labels != 315 || st.Annotators != 5 || st.LabelledItems != 45 {
		t.Errorf("ds1979 status %+v", st)
	}
	if len(st.LabelsPerItem) != 1 || st.LabelsPerItem[0] != (store.LabelsPerItem{Labels: 7, Items: 45}) {
		t.Errorf("labels per item %+v", st.LabelsPerItem)
	}
	want := map[string]int{"1": 127, "2": 125, "3": 48, "4": 15}
	for k, n := range want {
		if st.LabelsByClass[k] != n {
			t.Errorf("class %s: %d labels, want %d", k, st.LabelsByClass[k], n)
		}
	}
}

func TestImagesUpdateAndStatusText(t *testing.T) {
	proj, dir := newProject(t)
	writePNG(t, filepath.Join(dir, "photos", "a.png"))
	writePNG(t, filepath.Join(dir, "photos", "deep", "b.png"))
	write(t, dir, "photos/readme.md", "not an image")
	out := mustLoop(t, "items", "add", proj, filepath.Join(dir, "photos"))
	if !strings.Contains(out, "2 added") {
		t.Errorf("images: %s", out)
	}
	up := write(t, dir, "up.csv", "id,text\nr1,Oil and foam.\nr4,New.\n")
	code, _, errs := loop(t, "items", "add", proj, up)
	if code != 1 || !strings.Contains(errs, "--update") {
		t.Errorf("re-adding r1 without --update: exit %d %s", code, errs)
	}
	out = mustLoop(t, "items", "add", proj, up, "--update")
	if !strings.Contains(out, "1 added, 1 updated") {
		t.Errorf("update: %s", out)
	}
	// An image table with covariates.
	writePNG(t, filepath.Join(dir, "slides", "s1.png"))
	tab := write(t, dir, "slides/slides.csv", "path,magnification,parent\ns1.png,40,slide1\n")
	out = mustLoop(t, "items", "add", proj, "--format", "images", tab)
	if !strings.Contains(out, "1 added") {
		t.Errorf("image table: %s", out)
	}
	text := mustLoop(t, "status", proj)
	for _, w := range []string{"items: 7 (text 4, image 3)", "labels: 2 on 2 items by 2 annotators", "gold: 1", "labels per item: 5 item(s) with 0, 2 item(s) with 1"} {
		if !strings.Contains(text, w) {
			t.Errorf("status text lacks %q:\n%s", w, text)
		}
	}
	s, err := store.Open(proj)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	it, _, _ := s.Item("deep/b.png")
	if it.Kind != "image" || !filepath.IsAbs(it.Path) || len(it.SHA256) != 64 {
		t.Errorf("image item %+v", it)
	}
	it, _, _ = s.Item("s1.png")
	if it.Kind != "image" || it.Path != filepath.Join(dir, "slides", "s1.png") || it.Covariates["magnification"] != "40" || it.Parent != "slide1" {
		t.Errorf("image table item %+v", it)
	}
	log, _ := s.Audit()
	last := log[len(log)-2] // the --update import; the image table came after
	if last.Action != "items.add" || !strings.HasPrefix(last.Source, "loop items add "+proj) || !strings.HasSuffix(last.Source, "--update") {
		t.Errorf("audit entry %+v", last)
	}
}

func TestExitCodes(t *testing.T) {
	proj, dir := newProject(t)
	cases := []struct {
		args []string
		code int
	}{
		{[]string{"status", proj}, 0},
		{[]string{"--help"}, 0},
		{[]string{"items", "add", "--help"}, 0},
		{[]string{"status"}, 2},                        // missing DIR
		{[]string{"status", proj, "--bogus"}, 2},       // unknown flag
		{[]string{"nonsense"}, 2},                      // unknown command
		{[]string{"items"}, 2},                         // group without subcommand
		{[]string{"items", "frobnicate", proj}, 2},     // unknown subcommand
		{[]string{"items", "add", proj}, 2},            // no FILE
		{[]string{"init", filepath.Join(dir, "x")}, 2}, // no --codebook
		{[]string{"items", "add", proj, "--split", "paragraphs", filepath.Join(dir, "base.csv")}, 2},
		{[]string{"items", "add", proj, write(t, dir, "x.xlsx", "")}, 2}, // unknown format
		{[]string{"status", filepath.Join(dir, "nowhere")}, 1},           // no project
		{[]string{"items", "add", proj, filepath.Join(dir, "missing.csv")}, 1},
		{[]string{"init", proj, "--codebook", filepath.Join(dir, "codebook.yaml")}, 1}, // exists
	}
	for _, c := range cases {
		code, _, errs := loop(t, c.args...)
		if code != c.code {
			t.Errorf("loop %v: exit %d, want %d (%s)", c.args, code, c.code, errs)
		}
	}
	bad := write(t, dir, "bad.yaml", "question: q\nclasses:\n  - key: a\n")
	code, _, errs := loop(t, "init", filepath.Join(dir, "p2"), "--codebook", bad)
	if code != 1 || !strings.Contains(errs, "bad.yaml:2: field \"classes\"") {
		t.Errorf("bad codebook: %d %s", code, errs)
	}
}

// Every command has a worked example, a short description, and --help works.
func TestHelpEverywhere(t *testing.T) {
	var walk func(c *cobra.Command)
	n := 0
	walk = func(c *cobra.Command) {
		if c.Name() != "help" {
			n++
			if strings.TrimSpace(c.Example) == "" || c.Short == "" {
				t.Errorf("%q has no Example or Short", c.CommandPath())
			}
			args := append(strings.Fields(c.CommandPath())[1:], "--help")
			code, out, _ := loop(t, args...)
			if code != 0 || !strings.Contains(out, "Examples:") {
				t.Errorf("%v: exit %d, output lacks Examples", args, code)
			}
		}
		for _, s := range c.Commands() {
			walk(s)
		}
	}
	walk(newRoot())
	if n < 6 {
		t.Errorf("only %d commands", n)
	}
}

func TestQuietAndProgressSilent(t *testing.T) {
	proj, dir := newProject(t)
	items := write(t, dir, "more.csv", "id,text\nq1,a\n")
	code, out, errs := loop(t, "items", "add", proj, items, "--quiet")
	if code != 0 || errs != "" || !strings.Contains(out, "1 added") {
		t.Errorf("quiet: %d %q %q", code, out, errs)
	}
	// Without --quiet, stdout is not a terminal here: no progress bar either.
	items = write(t, dir, "more2.csv", "id,text\nq2,a\n")
	code, _, errs = loop(t, "items", "add", proj, items)
	if code != 0 || errs != "" {
		t.Errorf("not a terminal: %d, stderr %q", code, errs)
	}
}
