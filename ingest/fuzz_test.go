package ingest

import (
	"errors"
	"io"
	"strings"
	"testing"
	"unicode/utf8"

	"handoff"
)

// checkItems reads every item and checks the reader's promises: it never
// panics; an accepted item obeys handoff.Item's rules and is valid UTF-8;
// a refusal is an *Error naming the file.
func checkItems(t *testing.T, name string, format Format, data []byte, split bool) {
	r, err := NewItemReader(strings.NewReader(string(data)), name, format, ItemOptions{SplitSentences: split})
	for n := 0; err == nil; n++ {
		var it handoff.Item
		it, err = r.Next()
		if err != nil {
			break
		}
		if verr := it.Validate(); verr != nil {
			t.Fatalf("accepted an invalid item %+v: %v", it, verr)
		}
		if !utf8.ValidString(it.Text) || !utf8.ValidString(it.ID) || len(it.Text) > MaxField {
			t.Fatalf("accepted bad text %q", it.Text)
		}
	}
	if err == io.EOF {
		return
	}
	var ie *Error
	if !errors.As(err, &ie) || ie.File != name {
		t.Fatalf("error %v (%T) does not name the file", err, err)
	}
}

func FuzzItemsCSV(f *testing.F) {
	f.Add([]byte("id,text,parent,year\na,\"Hello, world. Bye.\",p,2020\nb,x,,NaN\n"), false)
	f.Add([]byte("id,text\n\"a\"\"b\",\"multi\nline\"\n"), true)
	f.Fuzz(func(t *testing.T, data []byte, split bool) {
		checkItems(t, "items.csv", CSV, data, split)
	})
}

func FuzzItemsJSONL(f *testing.F) {
	f.Add([]byte(`{"id":"a","text":"One. Two.","n":1.5}`+"\n"+`{"id":2,"text":"x","b":true,"z":null}`), true)
	f.Add([]byte(`{"id":"a","text":"\ud800"}`), false)
	f.Fuzz(func(t *testing.T, data []byte, split bool) {
		checkItems(t, "items.jsonl", JSONL, data, split)
	})
}

func FuzzLabels(f *testing.F) {
	f.Add([]byte("item,annotator,label,time,seconds\ni,a,x,2024-01-02T03:04:05Z,1.5\n"), false)
	f.Add([]byte(`{"item":"i","annotator":"a","label":"y","seconds":"Inf"}`), true)
	cb := &handoff.Codebook{Question: "q", Classes: []handoff.Class{{Key: "x"}, {Key: "y"}}}
	f.Fuzz(func(t *testing.T, data []byte, jsonl bool) {
		name, format := "labels.csv", CSV
		if jsonl {
			name, format = "labels.jsonl", JSONL
		}
		r, err := NewLabelReader(strings.NewReader(string(data)), name, format, LabelOptions{Codebook: cb})
		for err == nil {
			var l handoff.Label
			l, err = r.Next()
			if err != nil {
				break
			}
			if l.Item == "" || l.Annotator == "" || (l.Class != "x" && l.Class != "y") || l.Seconds < 0 || l.Seconds != l.Seconds {
				t.Fatalf("accepted a bad label %+v", l)
			}
		}
		var ie *Error
		if err != io.EOF && (!errors.As(err, &ie) || ie.File != name) {
			t.Fatalf("error %v (%T) does not name the file", err, err)
		}
	})
}

func FuzzCodebook(f *testing.F) {
	f.Add([]byte("question: q\nscale: ordinal\nclasses:\n  - key: \"1\"\n  - key: \"2\"\n"))
	f.Add([]byte(`{"question":"q","classes":[{"key":"a"},{"key":"b","name":"B"}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		cb, err := ParseCodebook("cb.yaml", data)
		if err != nil {
			var ie *Error
			if !errors.As(err, &ie) || ie.File != "cb.yaml" {
				t.Fatalf("error %v (%T) does not name the file", err, err)
			}
			return
		}
		if verr := cb.Validate(); verr != nil {
			t.Fatalf("accepted an invalid codebook: %v", verr)
		}
	})
}
