package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/gif"
	"image/jpeg"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"handoff"
)

func readItems(name, data string, opt ItemOptions) ([]handoff.Item, error) {
	f := GuessFormat(name, false)
	r, err := NewItemReader(strings.NewReader(data), name, f, opt)
	if err != nil {
		return nil, err
	}
	var out []handoff.Item
	for {
		it, err := r.Next()
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, it)
	}
}

func TestItemsGood(t *testing.T) {
	csvData := "id,text,parent,site,year\n" +
		"a,\"Oil sheen, near the weir.\",r1,s1,2021\n" +
		"b,\"two\nlines\",,s2,\n"
	got, err := readItems("items.csv", csvData, ItemOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := []handoff.Item{
		{ID: "a", Kind: handoff.KindText, Text: "Oil sheen, near the weir.", Parent: "r1", Covariates: map[string]string{"site": "s1", "year": "2021"}},
		{ID: "b", Kind: handoff.KindText, Text: "two\nlines", Covariates: map[string]string{"site": "s2"}},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("csv: got %+v\nwant %+v", got, want)
	}
	jsonData := `{"id": 7, "text": "hello", "score": 0.5, "ok": true, "note": null}` + "\n\n" +
		`{"id": "x", "text": "bye", "position": 2}` + "\r\n"
	got, err = readItems("items.jsonl", jsonData, ItemOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want = []handoff.Item{
		{ID: "7", Kind: handoff.KindText, Text: "hello", Covariates: map[string]string{"score": "0.5", "ok": "true"}},
		{ID: "x", Kind: handoff.KindText, Text: "bye", Position: 2},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("jsonl: got %+v\nwant %+v", got, want)
	}
	// Field mapping and an explicit covariate list.
	got, err = readItems("d.csv", "doc_id,body,site,year\nd1,Hi.,s,2020\n",
		ItemOptions{IDField: "doc_id", TextField: "body", Covariates: []string{"year"}})
	if err != nil || len(got) != 1 || got[0].ID != "d1" || !reflect.DeepEqual(got[0].Covariates, map[string]string{"year": "2020"}) {
		t.Errorf("mapped: %+v %v", got, err)
	}
	got, err = readItems("d.csv", "id,text,site\nd1,Hi.,s\n", ItemOptions{Covariates: []string{}})
	if err != nil || got[0].Covariates != nil {
		t.Errorf("no covariates: %+v %v", got, err)
	}
}

func TestSplitSentences(t *testing.T) {
	data := "id,text,parent,site\nrep1,\"Foam at the bridge. A heron was nesting!  Is the bank collapsing? \",siteA,s9\n"
	got, err := readItems("r.csv", data, ItemOptions{SplitSentences: true})
	if err != nil {
		t.Fatal(err)
	}
	texts := []string{"Foam at the bridge.", "A heron was nesting!", "Is the bank collapsing?"}
	if len(got) != len(texts) {
		t.Fatalf("got %d sentences: %+v", len(got), got)
	}
	for i, it := range got {
		if it.Text != texts[i] || it.Parent != "rep1" || it.Position != i || it.ID != "rep1#"+string(rune('0'+i)) {
			t.Errorf("sentence %d: %+v", i, it)
		}
		if it.Covariates["site"] != "s9" || it.Covariates["parent"] != "siteA" {
			t.Errorf("sentence %d covariates %+v", i, it.Covariates)
		}
	}
	// UAX #29: "Mr." followed by a capital is a break in the default rules;
	// a lowercase continuation is not (Unicode Standard Annex #29, rule SB8).
	if s := SplitSentences("He said etc. and left. Then rain."); len(s) != 2 {
		t.Errorf("SB8 lowercase continuation: %q", s)
	}
}

// TestBadInput is one case per kind of bad input; each error must name the
// file, the line and (where there is one) the field.
func TestBadInput(t *testing.T) {
	big := strings.Repeat("x", MaxField+1)
	cb := &handoff.Codebook{Question: "q", Classes: []handoff.Class{{Key: "a"}, {Key: "b"}}}
	cases := []struct {
		name, file, data string
		kind             string // items, labels, gold
		want             string // substring of the error
	}{
		{"malformed csv", "items.csv", "id,text\na,\"unclosed\n", "items", `items.csv:2: malformed CSV`},
		{"csv wrong field count", "items.csv", "id,text\na,b,c\n", "items", `items.csv:2: malformed CSV`},
		{"malformed json", "items.jsonl", `{"id":"a","text":"x"}` + "\n" + `{"id": "b", text}`, "items", `items.jsonl:2: malformed JSON`},
		{"json not an object", "items.jsonl", `["a","b"]`, "items", `items.jsonl:1: malformed JSON`},
		{"json nested value", "items.jsonl", `{"id":"a","text":"x","m":{"k":1}}`, "items", `items.jsonl:1: field "m": must be a string`},
		{"missing text column", "items.csv", "id,body\na,b\n", "items", `items.csv:1: field "text": missing required column "text"`},
		{"missing id column", "items.csv", "text\nb\n", "items", `items.csv:1: field "id": missing required column`},
		{"missing id field jsonl", "items.jsonl", `{"text":"x"}`, "items", `items.jsonl:1: field "id": missing item id`},
		{"empty file", "items.csv", "", "items", `items.csv:1: empty file`},
		{"empty text", "items.csv", "id,text\na,x\nb,\"  \"\n", "items", `items.csv:3: field "text": empty text`},
		{"empty id", "items.csv", "id,text\n,x\n", "items", `items.csv:2: field "id": empty item id`},
		{"text not utf-8 csv", "items.csv", "id,text\na,caf\xe9\n", "items", `items.csv:2: field "text": not UTF-8 text`},
		{"text not utf-8 jsonl", "items.jsonl", "{\"id\":\"a\",\"text\":\"caf\xe9\"}\n", "items", `items.jsonl:1: field "text": not UTF-8 text`},
		{"field over 1 MB csv", "items.csv", "id,text\na," + big + "\n", "items", `items.csv:2: field "text": field over 1 MB`},
		{"field over 1 MB jsonl", "items.jsonl", `{"id":"a","text":"` + big + `"}`, "items", `items.jsonl:1: field "text": field over 1 MB`},
		{"NaN covariate", "items.csv", "id,text,year\na,x,2020\nb,y,NaN\n", "items", `items.csv:3: field "year": covariate value "NaN" is not a finite number`},
		{"infinite covariate", "items.jsonl", `{"id":"a","text":"x","w":"-Inf"}`, "items", `items.jsonl:1: field "w": covariate value "-Inf"`},
		{"bad position", "items.csv", "id,text,position\na,x,-1\n", "items", `items.csv:2: field "position"`},
		{"listed covariate missing", "items.csv", "id,text\na,x\n", "items:cov", `items.csv:1: field "year": missing required column`},
		{"label not in codebook", "labels.csv", "item,annotator,label\ni1,ann,a\ni2,ann,zz\n", "labels", `labels.csv:3: field "label": label "zz" is not in the codebook`},
		{"label missing column", "labels.csv", "item,label\ni1,a\n", "labels", `labels.csv:1: field "annotator": missing required column`},
		{"label empty annotator", "labels.jsonl", `{"item":"i","annotator":"","label":"a"}`, "labels", `labels.jsonl:1: field "annotator": empty annotator`},
		{"label bad time", "labels.csv", "item,annotator,label,time\ni,a,a,yesterday\n", "labels", `labels.csv:2: field "time": time "yesterday" is not RFC 3339`},
		{"label NaN seconds", "labels.csv", "item,annotator,label,seconds\ni,a,a,NaN\n", "labels", `labels.csv:2: field "seconds"`},
		{"label negative seconds", "labels.csv", "item,annotator,label,seconds\ni,a,a,-3\n", "labels", `labels.csv:2: field "seconds"`},
		{"gold not in codebook", "gold.csv", "item,label\ni,q\n", "gold", `gold.csv:2: field "label": label "q" is not in the codebook`},
		{"gold missing label column", "gold.jsonl", `{"item":"i"}`, "gold", `gold.jsonl:1: field "label": missing label`},
		// NUL bytes and control characters (issue 14).
		{"NUL in text csv", "items.csv", "id,text\na,\"one\x00two\"\n", "items", `items.csv:2: field "text": holds a NUL byte`},
		{"NUL in text jsonl", "items.jsonl", `{"id":"a","text":"one\u0000two"}`, "items", `items.jsonl:1: field "text": holds a NUL byte`},
		{"newline in item id", "items.csv", "id,text\n\"a\nb\",x\n", "items", `items.csv:2: field "id": id "a\nb" holds the control character U+000A`},
		{"escape in parent id", "items.jsonl", `{"id":"a","text":"x","parent":"p\u001b[31m"}`, "items", `field "parent": id "p\x1b[31m" holds the control character U+001B`},
		{"escape in annotator id", "labels.csv", "item,annotator,label\ni,\"ann\x1b[2J\",a\n", "labels", `labels.csv:2: field "annotator": id "ann\x1b[2J" holds the control character`},
		{"newline in annotator id", "labels.jsonl", `{"item":"i","annotator":"a\nfake line","label":"a"}`, "labels", `field "annotator": id "a\nfake line"`},
		{"reordering character in item id", "gold.csv", "item,label\n\"a\u202eb\",a\n", "gold", `field "item": id "a\u202eb" holds the control character U+202E`},
		// Empty files (issue 14): a header alone is refused.
		{"items csv header only", "items.csv", "id,text\n", "items", `items.csv: no items in the file`},
		{"items jsonl blank", "items.jsonl", "\n\n", "items", `items.jsonl: no items in the file`},
		{"labels header only", "labels.csv", "item,annotator,label\n", "labels", `labels.csv: no labels in the file`},
		{"gold header only", "gold.csv", "item,label\n", "gold", `gold.csv: no gold answers in the file`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f := GuessFormat(c.file, false)
			var err error
			switch c.kind {
			case "items", "items:cov":
				opt := ItemOptions{}
				if c.kind == "items:cov" {
					opt.Covariates = []string{"year"}
				}
				_, err = readItems(c.file, c.data, opt)
			case "labels":
				var r *LabelReader
				r, err = NewLabelReader(strings.NewReader(c.data), c.file, f, LabelOptions{Codebook: cb})
				for err == nil {
					_, err = r.Next()
				}
			case "gold":
				var r *GoldReader
				r, err = NewGoldReader(strings.NewReader(c.data), c.file, f, GoldOptions{Codebook: cb})
				for err == nil {
					_, err = r.Next()
				}
			}
			if err == nil || err == io.EOF {
				t.Fatalf("no error, want %q", c.want)
			}
			var ie *Error
			if !errors.As(err, &ie) {
				t.Errorf("error %v is %T, want *ingest.Error", err, err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %q\nwant it to contain %q", err, c.want)
			}
		})
	}
}

func TestLabelsAndGold(t *testing.T) {
	data := "item,annotator,label,time,seconds\ni1,ann,a,2024-05-01T14:03:00Z,12.5\ni2,bob,b,,\n"
	r, err := NewLabelReader(strings.NewReader(data), "l.csv", CSV, LabelOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var got []handoff.Label
	for {
		l, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		got = append(got, l)
	}
	want := []handoff.Label{
		{Item: "i1", Annotator: "ann", Class: "a", Time: time.Date(2024, 5, 1, 14, 3, 0, 0, time.UTC), Seconds: 12.5},
		{Item: "i2", Annotator: "bob", Class: "b"},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %+v\nwant %+v", got, want)
	}
	g, err := NewGoldReader(strings.NewReader(`{"item":"i1","label":2}`+"\n"+`{"item":"i2","label":"b","source":"dr x"}`), "dir/expert.jsonl", JSONL, GoldOptions{})
	if err != nil {
		t.Fatal(err)
	}
	g1, _ := g.Next()
	g2, _ := g.Next()
	if g1 != (handoff.Gold{Item: "i1", Class: "2", Source: "expert.jsonl"}) || g2.Source != "dr x" {
		t.Errorf("gold %+v %+v", g1, g2)
	}
}

func TestCodebook(t *testing.T) {
	good := "name: urgency\nquestion: How urgent?\nscale: ordinal\nclasses:\n  - key: none\n  - key: low\n  - {key: high, name: High}\n"
	cb, err := ParseCodebook("cb.yaml", []byte(good))
	if err != nil || cb.Scale != handoff.Ordinal || len(cb.Classes) != 3 || cb.Classes[2].Name != "High" {
		t.Fatalf("%+v %v", cb, err)
	}
	js := `{"question": "Topic?", "classes": [{"key": "a"}, {"key": "b", "description": "bees"}]}`
	if cb, err := ParseCodebook("cb.json", []byte(js)); err != nil || cb.Classes[1].Description != "bees" {
		t.Fatalf("json: %+v %v", cb, err)
	}
	bad := []struct{ name, data, want string }{
		{"one class", "question: q\nclasses:\n  - key: a\n", `cb.yaml:2: field "classes": need at least two classes`},
		{"repeated key", "question: q\nclasses:\n  - key: a\n  - key: a\n", `cb.yaml:4: field "classes[1].key": "a" repeats classes[0]`},
		{"empty key", "question: q\nclasses:\n  - key: a\n  - name: B\n", `cb.yaml:4: field "classes[1].key": empty class key`},
		{"no question", "classes: [{key: a}, {key: b}]\n", `field "question"`},
		{"bad scale", "question: q\nscale: interval\nclasses: [{key: a}, {key: b}]\n", `cb.yaml:2: field "scale"`},
		{"unknown field", "question: q\nclases: [{key: a}, {key: b}]\n", `cb.yaml:2: unknown field "clases" (known fields: name, key, question, scale, classes, instructions, questions)`},
		{"unquoted commas in a flow mapping", "question: q\nclasses:\n  - {key: a, description: oil, foam}\n  - key: b\n", `cb.yaml:3: unknown field "foam" (known fields: key, name, description); in a {…} mapping, put a value holding commas in quotes`},
		{"a list for text", "question: [a, b]\nclasses: [{key: a}, {key: b}]\n", `cb.yaml:1: expected text, found a list`},
		{"text for the classes", "question: q\nclasses: abc\n", `cb.yaml:2: expected a list of classes, found text ("abc")`},
		{"a list for the codebook", "- a\n- b\n", `cb.yaml:1: expected a codebook (a mapping with`},
		{"junk after a JSON codebook", `{"question": "q", "classes": [{"key": "a"}, {"key": "b"}]}` + "\n}", `cb.yaml:2: unexpected "}" after the JSON object`},
		{"text after a JSON codebook", `{"question": "q", "classes": [{"key": "a"}, {"key": "b"}]} and more`, `cb.yaml:1: unexpected "and more" after the JSON object`},
		{"malformed JSON codebook", "{\"question\": \"q\",\n \"classes\": [}", `cb.yaml:2: malformed JSON`},
		{"two YAML documents", "question: q\nclasses: [{key: a}, {key: b}]\n---\nquestion: r\n", `a second YAML document`},
		{"too many classes", "question: q\nclasses:\n" + manyClasses(256), `field "classes": 256 classes; at most 255 are supported`},
		{"malformed", "question: [q\n", `cb.yaml`},
		{"empty", "", `cb.yaml: empty codebook`},
		{"ordinal out of order", "question: q\nscale: ordinal\nclasses:\n  - key: \"1\"\n  - key: \"3\"\n  - key: \"2\"\n", `cb.yaml:6: field "classes[2].key": ordinal classes must be listed lowest first`},
		{"not utf-8", "question: caf\xe9\nclasses: [{key: a}, {key: b}]\n", `not UTF-8`},
	}
	for _, c := range bad {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseCodebook("cb.yaml", []byte(c.data))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("error %v, want it to contain %q", err, c.want)
			}
			// Messages are for people: no Go type names.
			if err != nil && (strings.Contains(err.Error(), "handoff.") || strings.Contains(err.Error(), "[]")) {
				t.Errorf("error %q names a Go type", err)
			}
		})
	}
	// 255 classes, the most the analysis supports, are accepted.
	if _, err := ParseCodebook("cb.yaml", []byte("question: q\nclasses:\n"+manyClasses(255))); err != nil {
		t.Errorf("255 classes: %v", err)
	}
	// The shipped ds1979 codebook parses.
	if cb, err := ReadCodebook("../testdata/ingest/ds1979_codebook.yaml"); err != nil || len(cb.Classes) != 4 {
		t.Errorf("ds1979 codebook: %+v %v", cb, err)
	}
}

// manyClasses returns n YAML class entries k0, k1, ….
func manyClasses(n int) string {
	var b strings.Builder
	for i := range n {
		fmt.Fprintf(&b, "  - key: k%d\n", i)
	}
	return b.String()
}

func writeImage(t *testing.T, path string, enc func(io.Writer, image.Image) error) {
	t.Helper()
	img := image.NewPaletted(image.Rect(0, 0, 4, 3), color.Palette{color.Black, color.White})
	img.SetColorIndex(1, 1, 1)
	var buf bytes.Buffer
	if err := enc(&buf, img); err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestImages(t *testing.T) {
	dir := t.TempDir()
	writeImage(t, filepath.Join(dir, "a.png"), png.Encode)
	writeImage(t, filepath.Join(dir, "sub", "b.JPG"), func(w io.Writer, m image.Image) error { return jpeg.Encode(w, m, nil) })
	writeImage(t, filepath.Join(dir, "c.gif"), func(w io.Writer, m image.Image) error { return gif.Encode(w, m, nil) })
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("skip me"), 0o644)
	r, err := NewImageFolder(dir)
	if err != nil {
		t.Fatal(err)
	}
	if r.Len() != 3 {
		t.Fatalf("Len = %d", r.Len())
	}
	var ids []string
	for {
		it, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if it.Kind != handoff.KindImage || !filepath.IsAbs(it.Path) || len(it.SHA256) != 64 {
			t.Errorf("item %+v", it)
		}
		ids = append(ids, it.ID)
	}
	if !reflect.DeepEqual(ids, []string{"a.png", "c.gif", "sub/b.JPG"}) {
		t.Errorf("ids %v", ids)
	}
	// A list with a comment, a relative and a broken file.
	os.WriteFile(filepath.Join(dir, "broken.png"), []byte("\x89PNG\r\n\x1a\nnot really"), 0o644)
	list := "# images\na.png\n\nsub/b.JPG\nbroken.png\n"
	lr := NewImageList(strings.NewReader(list), "list.txt", dir)
	for i := 0; i < 2; i++ {
		if _, err := lr.Next(); err != nil {
			t.Fatal(err)
		}
	}
	_, err = lr.Next()
	if err == nil || !strings.HasPrefix(err.Error(), `list.txt:5: field "path": corrupt image`) {
		t.Errorf("broken image: %v", err)
	}
	lr = NewImageList(strings.NewReader("missing.png\n"), "list.txt", dir)
	if _, err := lr.Next(); err == nil || !strings.HasPrefix(err.Error(), `list.txt:1: field "path": unreadable image`) {
		t.Errorf("missing image: %v", err)
	}
	// An image table: path, id and covariates; relative to the base folder.
	tr, err := NewImageTable(strings.NewReader("path,id,magnification\nsub/b.JPG,slide-b,40\n"), "t.csv", CSV, dir, ItemOptions{})
	if err != nil {
		t.Fatal(err)
	}
	it, err := tr.Next()
	if err != nil || it.ID != "slide-b" || it.Kind != handoff.KindImage || it.Path != filepath.Join(dir, "sub", "b.JPG") ||
		!reflect.DeepEqual(it.Covariates, map[string]string{"magnification": "40"}) {
		t.Errorf("image table item %+v %v", it, err)
	}
	if _, err := NewImageTable(strings.NewReader("file\nx.png\n"), "t.csv", CSV, dir, ItemOptions{}); err == nil ||
		!strings.Contains(err.Error(), `t.csv:1: field "path": missing required column`) {
		t.Errorf("image table without path: %v", err)
	}
	// A broken image in a folder names the image file.
	fr, _ := NewImageFolder(dir)
	for err == nil || err.Error() == "" {
		_, err = fr.Next()
	}
	if !strings.Contains(err.Error(), "broken.png") {
		t.Errorf("folder with a broken image: %v", err)
	}
}

func TestGuessFormat(t *testing.T) {
	for name, want := range map[string]Format{"a.CSV": CSV, "b.jsonl": JSONL, "c.ndjson": JSONL, "d.txt": Images, "e.xlsx": ""} {
		if got := GuessFormat(name, false); got != want {
			t.Errorf("%s: %q want %q", name, got, want)
		}
	}
	if GuessFormat("x", true) != Images {
		t.Error("folder")
	}
}
