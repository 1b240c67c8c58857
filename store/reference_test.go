package store

import (
	"errors"
	"testing"

	"handoff"
)

func TestReferences(t *testing.T) {
	s := newStore(t)
	if _, err := s.PutItems(textItems(9, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	// A fresh project (and a file from before references) has none.
	if rs, err := s.References(); err != nil || len(rs) != 0 {
		t.Fatalf("References = %v, %v", rs, err)
	}
	if _, err := s.Reference("x"); !errors.Is(err, ErrNotFound) {
		t.Errorf("Reference(x): %v, want ErrNotFound", err)
	}
	items := handoff.Reference{Name: "experts-2019", Source: "e.csv", Items: []handoff.ReferenceLabel{{Item: "i000", Class: "a"}, {Item: "i004", Class: "c"}}}
	if err := s.PutReference(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name  string
		ref   handoff.Reference
		row   int
		field string
	}{
		{"unknown item", handoff.Reference{Name: "r1", Items: []handoff.ReferenceLabel{{Item: "i001", Class: "a"}, {Item: "nope", Class: "a"}}}, 1, "item"},
		{"bad class", handoff.Reference{Name: "r1", Items: []handoff.ReferenceLabel{{Item: "i001", Class: "z"}}}, 0, "label"},
		{"twice", handoff.Reference{Name: "r1", Items: []handoff.ReferenceLabel{{Item: "i001", Class: "a"}, {Item: "i001", Class: "b"}}}, 1, "item"},
		{"unknown parent", handoff.Reference{Name: "r1", Parents: []handoff.ReferenceScore{{Parent: "doc0", Value: 0.5, Question: "a"}, {Parent: "doc9", Value: 0.1, Question: "a"}}}, 1, "parent"},
		{"share out of range", handoff.Reference{Name: "r1", Parents: []handoff.ReferenceScore{{Parent: "doc0", Value: 1.5, Question: "a"}}}, 0, "value"},
		{"position on a nominal codebook", handoff.Reference{Name: "r1", Parents: []handoff.ReferenceScore{{Parent: "doc0", Value: 2}}}, 0, "question"},
	}
	for _, c := range cases {
		err := s.PutReference(c.ref, false, "test")
		var re *handoff.RowError
		if !errors.As(err, &re) || re.Row != c.row || re.Field != c.field {
			t.Errorf("%s: error %v, want row %d field %q", c.name, err, c.row+1, c.field)
		}
	}
	if err := s.PutReference(handoff.Reference{Name: "bad name!", Items: items.Items}, false, "test"); err == nil {
		t.Errorf("a bad name was accepted")
	}
	if err := s.PutReference(items, false, "test"); !errors.Is(err, ErrReferenceExists) {
		t.Errorf("same name again: %v, want ErrReferenceExists", err)
	}
	parents := handoff.Reference{Name: "doc-scores", Parents: []handoff.ReferenceScore{{Parent: "doc0", Value: 0.5, Question: "a"}, {Parent: "doc1", Value: 0, Question: "a"}, {Parent: "doc1", Value: 1, Question: "b"}}}
	if err := s.PutReference(parents, false, "test"); err != nil {
		t.Fatal(err)
	}
	items.Items = items.Items[:1]
	if err := s.PutReference(items, true, "test"); err != nil {
		t.Fatal(err)
	}
	rs, err := s.References()
	if err != nil || len(rs) != 2 || rs[0].Name != "doc-scores" || rs[1].Len() != 1 || rs[0].Kind() != handoff.ReferenceParents {
		t.Fatalf("References = %+v, %v", rs, err)
	}
	// Nothing a round reads holds them: gold is untouched.
	if g, _ := s.Gold(); len(g) != 0 {
		t.Errorf("references leaked into gold: %v", g)
	}
}
