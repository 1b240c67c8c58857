package ingest

import (
	"errors"
	"io"
	"reflect"
	"strings"
	"testing"
	"time"

	"handoff"
)

func readAllLabels(t *testing.T, name, text string, f Format, cb *handoff.Codebook) ([]handoff.Label, error) {
	t.Helper()
	lr, err := NewLabelReader(strings.NewReader(text), name, f, LabelOptions{Codebook: cb})
	if err != nil {
		return nil, err
	}
	var out []handoff.Label
	for {
		l, err := lr.Next()
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
		out = append(out, l)
	}
}

func TestTreeLabelFiles(t *testing.T) {
	cb, err := ParseCodebook("tree.yaml", []byte(treeYAML))
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 5, 1, 14, 3, 0, 0, time.UTC)
	want := []handoff.Label{
		{Item: "r1", Annotator: "ann", Class: "pollution", Time: t0},
		{Item: "r1", Annotator: "ann", Question: "severity", Class: "4", Time: t0},
		{Item: "r2", Annotator: "bob", Class: "wildlife"},
		{Item: "r2", Annotator: "bob", Question: "species", Class: "bird"},
	}
	cases := []struct {
		name, file, text string
		f                Format
	}{
		{"long csv", "l.csv", "item,annotator,question,label,time\nr1,ann,topic,pollution,2026-05-01T14:03:00Z\nr1,ann,severity,4,2026-05-01T14:03:00Z\nr2,bob,,wildlife,\nr2,bob,species,bird,\n", CSV},
		{"long jsonl", "l.jsonl", `{"item":"r1","annotator":"ann","label":"pollution","time":"2026-05-01T14:03:00Z"}
{"item":"r1","annotator":"ann","question":"severity","label":"4","time":"2026-05-01T14:03:00Z"}
{"item":"r2","annotator":"bob","question":"topic","label":"wildlife"}
{"item":"r2","annotator":"bob","question":"species","label":"bird"}
`, JSONL},
		{"wide csv", "w.csv", "item,annotator,topic,severity,species,time\nr1,ann,pollution,4,,2026-05-01T14:03:00Z\nr3,cat,,,,\nr2,bob,wildlife,,bird,\n", CSV},
		{"wide jsonl", "w.jsonl", `{"item":"r1","annotator":"ann","topic":"pollution","severity":"4","time":"2026-05-01T14:03:00Z"}
{"item":"r2","annotator":"bob","topic":"wildlife","severity":"","species":"bird"}
`, JSONL},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := readAllLabels(t, c.file, c.text, c.f, &cb)
			if err != nil {
				t.Fatal(err)
			}
			// The long files name the first question as "topic" or leave it empty.
			for i := range got {
				if got[i].Question == "topic" {
					got[i].Question = ""
				}
			}
			if !reflect.DeepEqual(got, want) {
				t.Errorf("got %+v\nwant %+v", got, want)
			}
		})
	}
}

func TestTreeLabelFileErrors(t *testing.T) {
	cb, err := ParseCodebook("tree.yaml", []byte(treeYAML))
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name, file, text string
		f                Format
		line             int
		field, msg       string
	}{
		{"unknown question", "l.csv", "item,annotator,question,label\nr1,a,topic,other\nr1,a,colour,red\n", CSV, 3, "question",
			`question "colour" is not in the codebook (questions: topic, severity, species)`},
		{"class of another question", "l.jsonl", "{\"item\":\"r1\",\"annotator\":\"a\",\"question\":\"severity\",\"label\":\"bird\"}\n", JSONL, 1, "label",
			`label "bird" is not a class of question "severity" (classes: 1, 2, 3, 4, 5)`},
		{"wide: bad answer", "w.csv", "item,annotator,topic,severity\nr1,a,pollution,4\nr2,a,pollution,9\n", CSV, 3, "severity",
			`label "9" is not a class of question "severity"`},
		{"wide: seconds", "w.csv", "item,annotator,topic,seconds\nr1,a,pollution,3\n", CSV, 2, "seconds", "cannot carry seconds"},
		{"wide jsonl: no answers", "w.jsonl", "{\"item\":\"r1\",\"annotator\":\"a\",\"colour\":\"red\"}\n", JSONL, 1, "label",
			"fields named by question keys (topic, severity, species)"},
		{"wide: missing annotator", "w.csv", "item,topic\nr1,pollution\n", CSV, 1, "annotator", `missing required column "annotator"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := readAllLabels(t, c.file, c.text, c.f, &cb)
			var e *Error
			if !errors.As(err, &e) || e.File != c.file || e.Line != c.line || e.Field != c.field || !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %v (%+v), want %s line %d field %q: %q", err, e, c.file, c.line, c.field, c.msg)
			}
		})
	}
	// A one-question codebook reads a file without a label column as before:
	// an error naming the missing column.
	one := handoff.Codebook{Question: "q", Classes: []handoff.Class{{Key: "a"}, {Key: "b"}}}
	if _, err := readAllLabels(t, "x.csv", "item,annotator,topic\nr1,a,a\n", CSV, &one); err == nil || !strings.Contains(err.Error(), `missing required column "label"`) {
		t.Errorf("one-question codebook, no label column: %v", err)
	}
}

func TestParseQuestion(t *testing.T) {
	cb, err := ParseCodebook("tree.yaml", []byte(treeYAML))
	if err != nil {
		t.Fatal(err)
	}
	good := "key: cause\nquestion: What caused it?\nclasses: [{key: spill}, {key: runoff}]\nwhen: {question: severity, in: [\"4\", \"5\"]}\n"
	q, err := ParseQuestion(cb, "cause.yaml", []byte(good))
	if err != nil || q.Key != "cause" || q.When == nil || q.When.Question != "severity" || len(q.Classes) != 2 {
		t.Fatalf("parsed %+v, %v", q, err)
	}
	cases := []struct {
		name, text string
		line       int
		field, msg string
	}{
		{"no key", "question: What?\nclasses: [{key: a}, {key: b}]\n", 1, "key", "needs a key"},
		{"key taken", "key: species\nquestion: What?\nclasses: [{key: a}, {key: b}]\n", 1, "key", `"species" is already the key of an earlier question`},
		{"unknown class in condition", "key: cause\nquestion: What?\nclasses: [{key: a}, {key: b}]\nwhen:\n  question: severity\n  in: [\"9\"]\n", 6, "when.in[0]",
			`"9" is not a class of question "severity"`},
		{"ordinal out of order", "key: cause\nquestion: What?\nscale: ordinal\nclasses: [{key: \"2\"}, {key: \"1\"}]\n", 4, "classes[1].key", "lowest first"},
		{"unknown field", "key: cause\nquestion: What?\nclasses: [{key: a}, {key: b}]\nwhem: {question: topic, in: [other]}\n", 4, "", "whem"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseQuestion(cb, "q.yaml", []byte(c.text))
			var e *Error
			if !errors.As(err, &e) || e.File != "q.yaml" || e.Line != c.line || e.Field != c.field || !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %v (%+v), want line %d field %q: %q", err, e, c.line, c.field, c.msg)
			}
		})
	}
}
