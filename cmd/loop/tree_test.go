package main

import (
	"bytes"
	"reflect"
	"strings"
	"testing"

	"handoff/store"
)

// A project written with one question gains a follow-up: what was stored
// stays as it was; wide label files answer both; consensus, agreement and
// export go question by question.
func TestCodebookAddQuestion(t *testing.T) {
	proj, dir := newProject(t)
	more := write(t, dir, "more.csv", "item,annotator,label\nr1,bob,pollution\nr1,cat,pollution\nr2,ann,wildlife\nr3,ann,pollution\nr3,bob,pollution\n")
	mustLoop(t, "labels", "add", proj, more)
	mustLoop(t, "consensus", proj, "--method", "majority")
	stored := func() (any, any, []byte) {
		s, err := store.Open(proj)
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		ls, err := s.Labels()
		if err != nil {
			t.Fatal(err)
		}
		cs, meta, err := s.Consensus()
		if err != nil {
			t.Fatal(err)
		}
		return ls, cs, meta
	}
	ls0, cs0, meta0 := stored()

	bad := []struct{ name, text, msg string }{
		{"unknown class", "key: severity\nquestion: How bad?\nclasses: [{key: low}, {key: high}]\nwhen: {question: main, in: [oil]}\n",
			`bad.yaml:4: field "when.in[0]": "oil" is not a class of question "main"`},
		{"unknown parent", "key: severity\nquestion: How bad?\nclasses: [{key: low}, {key: high}]\nwhen: {question: topic, in: [pollution]}\n",
			`field "when.question": "topic" is not a question of this codebook`},
		{"misspelt field", "key: severity\nquestion: How bad?\nclases: [{key: low}, {key: high}]\n", `bad.yaml:3`},
	}
	for _, c := range bad {
		f := write(t, dir, "bad.yaml", c.text)
		code, _, errs := loop(t, "codebook", "add-question", proj, f)
		if code == 0 || !strings.Contains(errs, c.msg) {
			t.Errorf("%s: exit %d, %q; want an error with %q", c.name, code, errs, c.msg)
		}
	}
	q := write(t, dir, "severity.yaml", "key: severity\nquestion: How bad is it?\nscale: ordinal\nclasses: [{key: low}, {key: mid}, {key: high}]\nwhen: {question: main, in: [pollution]}\n")
	if out := mustLoop(t, "codebook", "add-question", proj, q); !strings.Contains(out, `added question "severity" (3 classes); the codebook's questions: main, severity`) {
		t.Errorf("add-question said %q", out)
	}
	ls1, cs1, meta1 := stored()
	if !reflect.DeepEqual(ls0, ls1) || !reflect.DeepEqual(cs0, cs1) || !bytes.Equal(meta0, meta1) {
		t.Error("adding a question changed the stored labels or consensus")
	}
	if code, _, errs := loop(t, "codebook", "add-question", proj, q); code == 0 || !strings.Contains(errs, "already the key of an earlier question") {
		t.Errorf("adding it twice: exit %d %q", code, errs)
	}

	wide := write(t, dir, "wide.csv", "item,annotator,main,severity\nr1,dan,pollution,high\nr1,eve,pollution,high\nr1,bob,,mid\nr2,dan,wildlife,\nr3,dan,pollution,low\nr3,eve,pollution,low\n")
	mustLoop(t, "labels", "add", proj, wide)
	if code, _, errs := loop(t, "labels", "add", proj, write(t, dir, "w2.csv", "item,annotator,main,severity\nr1,fay,pollution,huge\n")); code == 0 || !strings.Contains(errs, `w2.csv:2: field "severity": label "huge" is not a class of question "severity"`) {
		t.Errorf("bad wide answer: exit %d %q", code, errs)
	}
	out := mustLoop(t, "consensus", proj, "--method", "majority")
	i, j := strings.Index(out, "question main:\n"), strings.Index(out, "\nquestion severity (asked when main is pollution):\n")
	if i != 0 || j < 0 || !strings.Contains(out[j:], "items not asked (their parent answer's consensus is outside the condition): 2") {
		t.Errorf("consensus of a tree:\n%s", out)
	}
	if one := mustLoop(t, "consensus", proj, "--method", "majority", "--question", "severity"); strings.Contains(one, "question main") || !strings.HasPrefix(one, "question severity") {
		t.Errorf("--question severity:\n%s", one)
	}
	if code, _, errs := loop(t, "consensus", proj, "--question", "colour"); code != 2 || !strings.Contains(errs, "questions: main, severity") {
		t.Errorf("--question colour: exit %d %q", code, errs)
	}
	if ag := mustLoop(t, "agreement", proj, "--question", "severity", "--reps", "20"); !strings.Contains(ag, "agreement over 2 items, 5 labels") {
		t.Errorf("agreement on severity:\n%s", ag)
	}
	csv := mustLoop(t, "export", proj, "--format", "csv")
	lines := strings.Split(strings.TrimSpace(csv), "\n")
	if !strings.HasSuffix(lines[0], ",severity_label,severity_source,severity_confidence,severity_labels") {
		t.Errorf("export header %q", lines[0])
	}
	// r3 is a gold item of class other: severity is not asked of it, though
	// two people answered it.
	want := map[string]string{"r1": ",high,crowd,0.6666666667,3", "r2": ",,,,", "r3": ",,,,"}
	for _, l := range lines[1:] {
		id := l[:strings.IndexByte(l, ',')]
		if !strings.HasSuffix(l, want[id]) {
			t.Errorf("export %s: %q, want it to end %q", id, l, want[id])
		}
	}
}
