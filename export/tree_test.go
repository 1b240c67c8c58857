package export

import (
	"bytes"
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"handoff"
	"handoff/round"
	"handoff/store"
)

// A two-level project exported line by line: majority vote, so that each
// confidence is a share of votes (2 of 3 → 0.6666666667).
func TestExportTree(t *testing.T) {
	cls := func(keys ...string) []handoff.Class {
		var out []handoff.Class
		for _, k := range keys {
			out = append(out, handoff.Class{Key: k})
		}
		return out
	}
	cb := handoff.Codebook{Name: "river", Key: "topic", Question: "What is it about?", Classes: cls("pollution", "wildlife", "other"),
		Questions: []handoff.Question{{Key: "severity", Question: "How bad?", Scale: handoff.Ordinal, Classes: cls("1", "2", "3"),
			When: &handoff.Condition{Question: "topic", In: []string{"pollution"}}}}}
	st, err := store.Create(filepath.Join(t.TempDir(), "p"), cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var items []handoff.Item
	for _, id := range []string{"r1", "r2", "r3", "r4"} {
		items = append(items, handoff.Item{ID: id, Kind: handoff.KindText, Text: "report " + id})
	}
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	l := func(item, ann, q, class string) handoff.Label {
		return handoff.Label{Item: item, Annotator: ann, Question: q, Class: class}
	}
	labels := []handoff.Label{
		l("r1", "a", "", "pollution"), l("r1", "b", "", "pollution"), l("r1", "c", "", "pollution"),
		l("r1", "a", "severity", "2"), l("r1", "b", "severity", "2"), l("r1", "c", "severity", "3"),
		l("r2", "a", "", "wildlife"), l("r2", "b", "", "wildlife"), l("r2", "c", "", "other"),
		l("r2", "a", "severity", "1"),                                // the consensus says wildlife: not asked
		l("r3", "a", "", "pollution"), l("r3", "b", "", "pollution"), // asked, not answered yet
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	cfg := round.ConsensusConfig{Method: "majority", NoCleaning: true, Seed: 1}
	// Before any follow-up consensus the severity columns are there, empty.
	if _, err := round.QuestionConsensus(st, "topic", cfg, "test"); err != nil {
		t.Fatal(err)
	}
	csvOf := func() []string {
		rows, err := Rows(st)
		if err != nil {
			t.Fatal(err)
		}
		var buf bytes.Buffer
		if err := Write(&buf, "csv", rows, cb.Keys()); err != nil {
			t.Fatal(err)
		}
		return strings.Split(strings.TrimSpace(buf.String()), "\n")
	}
	head := "item,kind,class,source,confidence,labels,model,round,parent,position,p_pollution,p_wildlife,p_other,severity_label,severity_source,severity_confidence,severity_labels"
	if got := csvOf(); got[0] != head || got[1] != "r1,text,pollution,crowd,1,3,,0,,0,1,0,0,,,," {
		t.Errorf("before the severity consensus:\n%s", strings.Join(got[:2], "\n"))
	}
	if _, err := round.QuestionConsensus(st, "severity", cfg, "test"); err != nil {
		t.Fatal(err)
	}
	want := []string{head,
		"r1,text,pollution,crowd,1,3,,0,,0,1,0,0,2,crowd,0.6666666667,3",
		"r2,text,wildlife,crowd,0.6666666667,3,,0,,0,0,0.6666666667,0.3333333333,,,,",
		"r3,text,pollution,crowd,1,2,,0,,0,1,0,0,,,,",
		"r4,text,,,0,0,,0,,0,,,,,,,",
	}
	got := csvOf()
	if len(got) != len(want) {
		t.Fatalf("%d lines, want %d:\n%s", len(got), len(want), strings.Join(got, "\n"))
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("line %d:\n got %s\nwant %s", i+1, got[i], want[i])
		}
	}
	rows, _ := Rows(st)
	var buf bytes.Buffer
	if err := Write(&buf, "jsonl", rows, cb.Keys()); err != nil {
		t.Fatal(err)
	}
	var first Row
	if err := json.Unmarshal([]byte(strings.SplitN(buf.String(), "\n", 2)[0]), &first); err != nil {
		t.Fatal(err)
	}
	if len(first.Answers) != 1 || first.Answers[0] != (Answer{Question: "severity", Class: "2", Source: "crowd", Confidence: 2.0 / 3, Labels: 3}) {
		t.Errorf("jsonl answers of r1: %+v", first.Answers)
	}
	if err := Write(&bytes.Buffer{}, "parquet", rows, cb.Keys()); err != nil {
		t.Errorf("parquet: %v", err)
	}
}
