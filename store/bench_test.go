package store

import (
	"fmt"
	"testing"

	"handoff"
)

// benchStore holds 20,000 items and 200,000 labels (10 per item, 50
// annotators, in item order).
func benchStore(b *testing.B) *Store {
	b.Helper()
	s, err := Create(b.TempDir(), testCodebook, "bench")
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { s.Close() })
	const nItems, per = 20_000, 10
	if _, err := s.PutItems(textItems(nItems, "i"), false, "bench"); err != nil {
		b.Fatal(err)
	}
	labels := make([]handoff.Label, 0, nItems*per)
	for i := 0; i < nItems; i++ {
		for j := 0; j < per; j++ {
			labels = append(labels, handoff.Label{Item: fmt.Sprintf("i%03d", i), Annotator: fmt.Sprint("a", (i+j)%50), Class: testCodebook.Classes[(i*j)%3].Key})
		}
	}
	if _, err := s.PutLabels(labels, "bench"); err != nil {
		b.Fatal(err)
	}
	return s
}

func BenchmarkLabelTable(b *testing.B) {
	s := benchStore(b)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		t, err := s.LabelTable(false)
		if err != nil || t.Len() != 200_000 {
			b.Fatal(err)
		}
	}
}

func BenchmarkEachLabel(b *testing.B) {
	s := benchStore(b)
	b.ResetTimer()
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		n := 0
		if err := s.EachLabel(func(r *LabelRecord) error { n++; return nil }); err != nil || n != 200_000 {
			b.Fatal(err)
		}
	}
}
