package ingest

import (
	"strings"
	"testing"
)

const treeYAML = `name: river reports
questions:
  - key: topic
    question: What is the report about?
    classes:
      - key: pollution
      - key: wildlife
      - key: bank-damage
      - key: other
  - key: severity
    question: How severe is it?
    scale: ordinal
    classes: [{key: "1"}, {key: "2"}, {key: "3"}, {key: "4"}, {key: "5"}]
    when: {question: topic, in: [pollution, bank-damage]}
  - key: species
    question: Which kind of animal?
    classes: [{key: bird}, {key: fish}, {key: mammal}]
    when: {question: topic, in: [wildlife]}
`

func TestCodebookTree(t *testing.T) {
	cb, err := ParseCodebook("tree.yaml", []byte(treeYAML))
	if err != nil {
		t.Fatal(err)
	}
	if !cb.Tree() || cb.FirstKey() != "topic" || len(cb.All()) != 3 || cb.Question != "What is the report about?" {
		t.Fatalf("parsed %+v", cb)
	}
	sev, _ := cb.QuestionIndex("severity")
	if sev != 1 || cb.Parent(sev) != 0 || !cb.Sub(sev).IsOrdinal() {
		t.Errorf("severity: index %d, parent %d, ordinal %v", sev, cb.Parent(sev), cb.Sub(sev).IsOrdinal())
	}
	for _, tc := range []struct {
		topic string
		sev   bool
	}{{"pollution", true}, {"bank-damage", true}, {"wildlife", false}, {"other", false}, {"", false}} {
		ans := map[string]string{}
		if tc.topic != "" {
			ans["topic"] = tc.topic
		}
		if got := cb.Asked(sev, ans); got != tc.sev {
			t.Errorf("topic %q: severity asked %v, want %v", tc.topic, got, tc.sev)
		}
	}
	// The mixed form (first question at the top level, follow-ups under
	// questions) reads the same; so does a one-question codebook as before.
	mixed := "key: topic\nquestion: What is the report about?\nclasses: [{key: pollution}, {key: wildlife}, {key: bank-damage}, {key: other}]\n" +
		treeYAML[strings.Index(treeYAML, "  - key: severity"):]
	mixed = strings.Replace(mixed, "  - key: severity", "questions:\n  - key: severity", 1)
	cb2, err := ParseCodebook("mixed.yaml", []byte(mixed))
	if err != nil {
		t.Fatal(err)
	}
	if len(cb2.All()) != 3 || cb2.FirstKey() != "topic" {
		t.Errorf("mixed form: %+v", cb2)
	}
	one, err := ParseCodebook("one.yaml", []byte("question: Which?\nclasses: [{key: a}, {key: b}]\n"))
	if err != nil || one.Tree() || one.FirstKey() != "main" || len(one.All()) != 1 {
		t.Errorf("one-question codebook: %+v %v", one, err)
	}
}

// Each broken rule of a tree is named, with its field and line.
func TestCodebookTreeErrors(t *testing.T) {
	for _, tc := range []struct {
		name, from, to, want string
	}{
		{"unknown question", "{question: topic, in: [wildlife]}", "{question: topc, in: [wildlife]}", `"questions[2].when.question": "topc" is not a question`},
		{"unknown class", "in: [wildlife]", "in: [wildlif]", `"questions[2].when.in[0]": "wildlif" is not a class of question "topic"`},
		{"never asked", "in: [wildlife]", "in: []", `"questions[2].when.in": no answers listed`},
		{"cycle", "{question: topic, in: [pollution, bank-damage]}\n  - key: species\n    question: Which kind of animal?\n    classes: [{key: bird}, {key: fish}, {key: mammal}]\n    when: {question: topic, in: [wildlife]}",
			"{question: species, in: [bird]}\n  - key: species\n    question: Which kind of animal?\n    classes: [{key: bird}, {key: fish}, {key: mammal}]\n    when: {question: severity, in: [\"1\"]}", "cycle"},
		{"self", "{question: topic, in: [wildlife]}", "{question: species, in: [bird]}", "conditioned on itself"},
		{"repeated key", "  - key: species", "  - key: severity", `"questions[2].key": "severity" is already the key`},
		{"ordinal order", `[{key: "1"}, {key: "2"}`, `[{key: "2"}, {key: "1"}`, `"questions[1].classes[1].key"`},
		{"condition on the first", "  - key: topic\n    question: What is the report about?", "  - key: topic\n    when: {question: severity, in: [\"1\"]}\n    question: What is the report about?", `"questions[0].when"`},
		{"one class", "    classes: [{key: bird}, {key: fish}, {key: mammal}]", "    classes: [{key: bird}]", `"questions[2].classes": need at least two`},
	} {
		y := strings.Replace(treeYAML, tc.from, tc.to, 1)
		if y == treeYAML {
			t.Fatalf("%s: replacement not found", tc.name)
		}
		_, err := ParseCodebook("tree.yaml", []byte(y))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want it to contain %q", tc.name, err, tc.want)
			continue
		}
		if !strings.Contains(err.Error(), "tree.yaml:") {
			t.Errorf("%s: error %q names no file and line", tc.name, err)
		}
	}
}
