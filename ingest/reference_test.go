package ingest

import (
	"strings"
	"testing"

	"handoff"
)

func TestReadReference(t *testing.T) {
	ord := handoff.Codebook{Question: "How urgent?", Scale: handoff.Ordinal, Classes: []handoff.Class{{Key: "low"}, {Key: "mid"}, {Key: "high"}}}
	nom := handoff.Codebook{Question: "Topic?", Classes: []handoff.Class{{Key: "a"}, {Key: "b"}}}
	cases := []struct {
		name, file, text string
		cb               handoff.Codebook
		want             string // error text, or "" for success
		rows             int
		kind             handoff.ReferenceKind
	}{
		{"items csv", "e.csv", "item,label\nx1,low\nx2,high\n", ord, "", 2, handoff.ReferenceItems},
		{"parents csv", "e.csv", "parent,value,question\nd1,2.5,\nd2,0.4,high\nd2,1,position\n", ord, "", 3, handoff.ReferenceParents},
		{"parents jsonl", "e.jsonl", "{\"parent\":\"d1\",\"value\":0.25,\"question\":\"a\"}\n\n{\"parent\":\"d2\",\"value\":1,\"question\":\"b\"}\n", nom, "", 2, handoff.ReferenceParents},
		{"items jsonl", "e.jsonl", "{\"item\":\"x\",\"label\":\"a\"}\n", nom, "", 1, handoff.ReferenceItems},
		{"bad class", "e.csv", "item,label\nx1,low\nx2,urgent\n", ord, `e.csv:3: field "label": label "urgent" is not in the codebook`, 0, ""},
		{"both columns", "e.csv", "item,parent,label\n", ord, "e.csv:1: the header has both item and parent", 0, ""},
		{"no kind", "e.csv", "id,label\nx,low\n", ord, "no item or parent column", 0, ""},
		{"missing value column", "e.csv", "parent,score\nd1,2\n", ord, `e.csv:1: field "value": missing required column "value"`, 0, ""},
		{"value not a number", "e.csv", "parent,value\nd1,2\nd2,high\n", ord, `e.csv:3: field "value": value "high" is not a finite number`, 0, ""},
		{"position out of range", "e.csv", "parent,value\nd1,2\nd2,4\n", ord, `e.csv:3: field "value": value 4 is outside [1, 3]`, 0, ""},
		{"share out of range", "e.csv", "parent,value,question\nd1,40,high\n", ord, `e.csv:2: field "value": value 40 is outside [0, 1], the range of share of high`, 0, ""},
		{"nominal needs a class", "e.csv", "parent,value\nd1,0.5\n", nom, `e.csv:2: field "question": question "": the codebook is nominal`, 0, ""},
		{"unknown question", "e.csv", "parent,value,question\nd1,0.5,colour\n", nom, `question "colour" is not a class key`, 0, ""},
		{"item twice", "e.csv", "item,label\nx1,a\nx2,b\nx1,b\n", nom, `e.csv:4: field "item": item "x1" is coded twice (first in row 1)`, 0, ""},
		{"parent twice", "e.jsonl", "{\"parent\":\"d\",\"value\":0.5,\"question\":\"a\"}\n{\"parent\":\"d\",\"value\":0.2,\"question\":\"a\"}\n", nom, `e.jsonl:2: field "parent": parent "d" is scored twice`, 0, ""},
		{"mixed jsonl", "e.jsonl", "{\"item\":\"x\",\"label\":\"a\"}\n{\"parent\":\"d\",\"value\":0.5,\"question\":\"a\"}\n", nom, "e.jsonl:2: this row holds a parent field but the rows before hold item", 0, ""},
		{"header only", "e.csv", "item,label\n", nom, "no reference rows in the file", 0, ""},
		{"empty label", "e.csv", "item,label\nx,\n", nom, `e.csv:2: field "label": empty label`, 0, ""},
	}
	for _, c := range cases {
		ref, locs, err := ReadReference(strings.NewReader(c.text), c.file, GuessFormat(c.file, false), "experts", c.cb)
		if c.want != "" {
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: error %v, want %q", c.name, err, c.want)
			}
			continue
		}
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if ref.Len() != c.rows || len(locs) != c.rows || ref.Kind() != c.kind || ref.Name != "experts" || ref.Source != c.file {
			t.Errorf("%s: %+v (%d locations)", c.name, ref, len(locs))
		}
	}
}
