package export

import (
	"bytes"
	"path/filepath"
	"strings"
	"testing"

	"handoff"
	"handoff/round"
	"handoff/store"
)

// Machine labels fill the columns of their own question: the first
// question's plain columns, a follow-up's KEY_label, KEY_source and
// KEY_confidence where no crowd consensus answers it and where the item's
// exported answer to its parent (crowd or machine) asks it.
func TestExportMachineLabelsPerQuestion(t *testing.T) {
	cls := func(keys ...string) []handoff.Class {
		var out []handoff.Class
		for _, k := range keys {
			out = append(out, handoff.Class{Key: k})
		}
		return out
	}
	cb := handoff.Codebook{Name: "river", Key: "topic", Question: "What is it about?", Classes: cls("pollution", "wildlife"),
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
	l := func(item, ann, class string) handoff.Label {
		return handoff.Label{Item: item, Annotator: ann, Class: class}
	}
	if _, err := st.PutLabels([]handoff.Label{l("r1", "a", "pollution"), l("r1", "b", "pollution"), l("r2", "a", "wildlife"), l("r2", "b", "wildlife")}, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := round.QuestionConsensus(st, "topic", round.ConsensusConfig{Method: "majority", NoCleaning: true, Seed: 1}, "test"); err != nil {
		t.Fatal(err)
	}
	m := func(item, q, class string, conf float64) handoff.MachineLabel {
		return handoff.MachineLabel{Item: item, Question: q, Class: class, Confidence: conf, Model: "m" + q, Round: 2}
	}
	ms := []handoff.MachineLabel{
		m("r1", "severity", "2", 0.8),                                 // crowd pollution: asked
		m("r2", "severity", "3", 0.7),                                 // crowd wildlife: not asked, not shown
		m("r3", "", "pollution", 0.95), m("r3", "severity", "1", 0.9), // machine pollution: asked
		m("r4", "", "wildlife", 0.99), m("r4", "severity", "1", 0.6), // machine wildlife: not asked
	}
	if err := st.CommitRound(store.RoundWrite{Round: 2, Machine: ms}, "test"); err != nil {
		t.Fatal(err)
	}
	rows, err := Rows(st)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Write(&buf, "csv", rows, cb.Keys()); err != nil {
		t.Fatal(err)
	}
	want := []string{
		"item,kind,class,source,confidence,labels,model,round,parent,position,p_pollution,p_wildlife,severity_label,severity_source,severity_confidence,severity_labels",
		"r1,text,pollution,crowd,1,2,,0,,0,1,0,2,machine,0.8,0",
		"r2,text,wildlife,crowd,1,2,,0,,0,0,1,,,,",
		"r3,text,pollution,machine,0.95,0,m,2,,0,,,1,machine,0.9,0",
		"r4,text,wildlife,machine,0.99,0,m,2,,0,,,,,,",
	}
	got := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if len(got) != len(want) {
		t.Fatalf("%d lines, want %d:\n%s", len(got), len(want), buf.String())
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("line %d:\n got %s\nwant %s", i+1, got[i], want[i])
		}
	}
}
