package store

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"handoff"
)

var testCodebook = handoff.Codebook{
	Name: "topic", Question: "What is it about?",
	Classes: []handoff.Class{{Key: "a"}, {Key: "b"}, {Key: "c"}},
}

func newStore(t *testing.T) *Store {
	t.Helper()
	s, err := Create(t.TempDir(), testCodebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func textItems(n int, prefix string) []handoff.Item {
	out := make([]handoff.Item, n)
	for i := range out {
		out[i] = handoff.Item{ID: fmt.Sprintf("%s%03d", prefix, i), Kind: handoff.KindText,
			Text: fmt.Sprintf("text %d", i), Parent: fmt.Sprintf("doc%d", i/3), Position: i % 3}
	}
	return out
}

func statsJSON(t *testing.T, s *Store) string {
	t.Helper()
	st, err := s.Stats()
	if err != nil {
		t.Fatal(err)
	}
	b, _ := json.Marshal(st)
	return string(b)
}

func TestCreateOpenRoundTrip(t *testing.T) {
	dir := t.TempDir()
	s, err := Create(dir, testCodebook, "loop init")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.PutItems(textItems(5, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	s.Close()
	if _, err := Create(dir, testCodebook, "again"); !errors.Is(err, errExists) {
		t.Fatalf("second Create: %v, want errExists", err)
	}
	s, err = Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if !reflect.DeepEqual(s.Codebook(), testCodebook) {
		t.Errorf("codebook %+v", s.Codebook())
	}
	it, n, err := s.Item("i003")
	if err != nil || n != 3 || it.Text != "text 3" || it.Parent != "doc1" || it.Position != 0 {
		t.Errorf("Item(i003) = %+v, %d, %v", it, n, err)
	}
	if _, _, err := s.Item("nope"); !errors.Is(err, ErrNotFound) {
		t.Errorf("Item(nope) err = %v", err)
	}
	if _, err := Open(t.TempDir()); !errors.Is(err, errNoProject) {
		t.Errorf("Open(empty dir) = %v, want errNoProject", err)
	}
	if _, err := Create(t.TempDir(), handoff.Codebook{Question: "q", Classes: []handoff.Class{{Key: "x"}}}, "t"); err == nil {
		t.Error("Create with a one-class codebook succeeded")
	}
}

func TestNewerSchemaRefused(t *testing.T) {
	dir := t.TempDir()
	s, err := Create(dir, testCodebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	db, err := bolt.Open(Path(dir), 0o644, nil)
	if err != nil {
		t.Fatal(err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		v := make([]byte, 4)
		binary.BigEndian.PutUint32(v, schemaVersion+1)
		return tx.Bucket(bMeta).Put(kSchema, v)
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	_, err = Open(dir)
	if !errors.Is(err, errNewerSchema) {
		t.Fatalf("Open of a newer schema: %v, want errNewerSchema", err)
	}
	if !strings.Contains(err.Error(), "upgrade loop") || !strings.Contains(err.Error(), fmt.Sprint(schemaVersion+1)) {
		t.Errorf("message %q should say the version and to upgrade loop", err)
	}
}

func TestItemsDuplicateAndUpdate(t *testing.T) {
	s := newStore(t)
	s.ImportChunk = 4
	if _, err := s.PutItems(textItems(10, "i"), false, "first"); err != nil {
		t.Fatal(err)
	}
	before := statsJSON(t, s)
	// A duplicate at the end of a 13-item import (4 chunks): nothing lands.
	batch := append(textItems(12, "j"), handoff.Item{ID: "i002", Kind: handoff.KindText, Text: "x"})
	_, err := s.PutItems(batch, false, "dup")
	var de *DataError
	if !errors.As(err, &de) || de.Field != "id" {
		t.Fatalf("duplicate: err = %v, want DataError on id", err)
	}
	if got := statsJSON(t, s); got != before {
		t.Fatalf("stats changed after a failed import:\n%s\n%s", before, got)
	}
	if _, _, err := s.Item("j000"); !errors.Is(err, ErrNotFound) {
		t.Errorf("j000 from the failed import is visible: %v", err)
	}
	// A duplicate inside one import is refused too.
	_, err = s.PutItems([]handoff.Item{{ID: "k", Kind: handoff.KindText, Text: "1"}, {ID: "k", Kind: handoff.KindText, Text: "2"}}, false, "dup2")
	if !errors.As(err, &de) {
		t.Fatalf("duplicate within one import: %v", err)
	}
	// Update replaces and keeps the number; a failed update restores the old text.
	res, err := s.PutItems([]handoff.Item{{ID: "i001", Kind: handoff.KindText, Text: "new"}, {ID: "z", Kind: handoff.KindText, Text: "z"}}, true, "upd")
	if err != nil || res.Added != 1 || res.Updated != 1 {
		t.Fatalf("update: %+v %v", res, err)
	}
	it, n, _ := s.Item("i001")
	if it.Text != "new" || n != 1 {
		t.Errorf("after update: %+v number %d", it, n)
	}
	before = statsJSON(t, s)
	upd := textItems(9, "i")
	for i := range upd {
		upd[i].Text = "changed"
	}
	upd = append(upd, handoff.Item{ID: "bad", Kind: handoff.KindText, Text: " "})
	if _, err := s.PutItems(upd, true, "bad update"); !errors.As(err, &de) || de.Field != "text" || de.Error() != `field "text": empty text` {
		t.Fatalf("update with an empty text: %v", err)
	}
	it, _, _ = s.Item("i001")
	if it.Text != "new" {
		t.Errorf("failed update left i001 = %q, want it restored to \"new\"", it.Text)
	}
	it, _, _ = s.Item("i007")
	if it.Text != "text 7" {
		t.Errorf("failed update left i007 = %q", it.Text)
	}
	if got := statsJSON(t, s); got != before {
		t.Fatalf("stats changed after a failed update")
	}
	// Numbering continues where it was.
	if _, err := s.PutItems([]handoff.Item{{ID: "after", Kind: handoff.KindText, Text: "t"}}, false, "t"); err != nil {
		t.Fatal(err)
	}
	if _, n, _ := s.Item("after"); n != 11 {
		t.Errorf("number after rollback = %d, want 11", n)
	}
}

func TestInterruptedImportRolledBackOnOpen(t *testing.T) {
	dir := t.TempDir()
	s, err := Create(dir, testCodebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.PutItems(textItems(3, "i"), false, "t"); err != nil {
		t.Fatal(err)
	}
	before := statsJSON(t, s)
	// Simulate a process that committed one chunk of an import (adding
	// items and replacing i001) and then died: the pending mark stays.
	err = s.db.Update(func(tx *bolt.Tx) error {
		ib, ids := tx.Bucket(bItems), tx.Bucket(bItemIDs)
		p := pendingImport{Kind: "items", ItemSeq: ib.Sequence(), LabelSeq: 0, AnnSeq: 0}
		if err := putJSON(tx.Bucket(bMeta), kPending, p); err != nil {
			return err
		}
		seq := ib.Sequence()
		for _, it := range textItems(5, "new") {
			v, _ := encodeItem(&it)
			ib.Put(u64(seq), v)
			ids.Put([]byte(it.ID), u64(seq))
			seq++
		}
		k := u64(1)
		if err := saveUndo(tx, k, ib.Get(k)); err != nil {
			return err
		}
		v, _ := encodeItem(&handoff.Item{ID: "i001", Kind: handoff.KindText, Text: "replaced"})
		ib.Put(k, v)
		return ib.SetSequence(seq)
	})
	if err != nil {
		t.Fatal(err)
	}
	s.Close()
	s, err = Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if got := statsJSON(t, s); got != before {
		t.Fatalf("after reopening:\n%s\nwant\n%s", got, before)
	}
	if it, _, _ := s.Item("i001"); it.Text != "text 1" {
		t.Errorf("i001 = %q, want the text from before the interrupted import", it.Text)
	}
}

func TestLabelsAndTable(t *testing.T) {
	s := newStore(t)
	s.ImportChunk = 3
	if _, err := s.PutItems(textItems(4, "i"), false, "t"); err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2024, 5, 1, 14, 3, 0, 0, time.UTC)
	labels := []handoff.Label{
		{Item: "i000", Annotator: "ann", Class: "a", Time: t0, Seconds: 3.5},
		{Item: "i000", Annotator: "bob", Class: "b"},
		{Item: "i002", Annotator: "ann", Class: "c", Seconds: 1},
		{Item: "i000", Annotator: "ann", Class: "a"},
		{Item: "i003", Annotator: "cy", Class: "b"},
	}
	if _, err := s.PutLabels(labels, "t"); err != nil {
		t.Fatal(err)
	}
	got, err := s.Labels()
	if err != nil || !reflect.DeepEqual(got, labels) {
		t.Fatalf("Labels() = %+v, %v", got, err)
	}
	fi, _ := s.LabelsFor("i000")
	if len(fi) != 3 || fi[1].Annotator != "bob" {
		t.Errorf("LabelsFor(i000) = %+v", fi)
	}
	by, _ := s.LabelsBy("ann")
	if len(by) != 3 || by[1].Item != "i002" {
		t.Errorf("LabelsBy(ann) = %+v", by)
	}
	if tab, err := s.LabelTable(false); err != nil || tab.Time != nil || tab.Seconds != nil || tab.Len() != 5 {
		t.Fatalf("LabelTable(false): %+v %v", tab, err)
	}
	tab, err := s.LabelTable(true)
	if err != nil {
		t.Fatal(err)
	}
	wantItem := []uint32{0, 0, 2, 0, 3}
	wantAnn := []uint32{0, 1, 0, 0, 2}
	wantClass := []uint16{0, 1, 2, 0, 1}
	if !reflect.DeepEqual(tab.Item, wantItem) || !reflect.DeepEqual(tab.Annotator, wantAnn) || !reflect.DeepEqual(tab.Class, wantClass) {
		t.Errorf("table %v %v %v", tab.Item, tab.Annotator, tab.Class)
	}
	if tab.AnnotatorIDs[2] != "cy" || tab.ItemIDs[3] != "i003" || tab.Seconds[0] != 3.5 || tab.Time[0] != t0.UnixNano() || tab.Time[1] != 0 {
		t.Errorf("table names/times %+v", tab)
	}
	st, _ := s.Stats()
	if st.Labels != 5 || st.LabelledItems != 3 || st.Annotators != 3 || st.Parents != 2 {
		t.Errorf("stats %+v", st)
	}
	wantDist := []LabelsPerItem{{0, 1}, {1, 2}, {3, 1}}
	if !reflect.DeepEqual(st.LabelsPerItem, wantDist) {
		t.Errorf("labels per item %+v, want %+v", st.LabelsPerItem, wantDist)
	}
	if st.LabelsByClass["a"] != 2 || st.LabelsByClass["b"] != 2 || st.LabelsByClass["c"] != 1 {
		t.Errorf("by class %+v", st.LabelsByClass)
	}

	before := statsJSON(t, s)
	bad := []struct {
		name  string
		l     handoff.Label
		field string
	}{
		{"unknown item", handoff.Label{Item: "nope", Annotator: "new", Class: "a"}, "item"},
		{"class not in codebook", handoff.Label{Item: "i001", Annotator: "new", Class: "zz"}, "label"},
		{"empty annotator", handoff.Label{Item: "i001", Class: "a"}, "annotator"},
		{"negative seconds", handoff.Label{Item: "i001", Annotator: "new", Class: "a", Seconds: -1}, "seconds"},
		{"time out of range", handoff.Label{Item: "i001", Annotator: "new", Class: "a", Time: time.Date(1500, 1, 1, 0, 0, 0, 0, time.UTC)}, "time"},
	}
	for _, c := range bad {
		t.Run(c.name, func(t *testing.T) {
			// Good labels (by a new annotator) in earlier chunks, then the bad one.
			batch := []handoff.Label{}
			for i := 0; i < 7; i++ {
				batch = append(batch, handoff.Label{Item: "i001", Annotator: fmt.Sprint("new", i), Class: "a"})
			}
			batch = append(batch, c.l)
			_, err := s.PutLabels(batch, "bad")
			var de *DataError
			if !errors.As(err, &de) || de.Field != c.field {
				t.Fatalf("err = %v, want DataError on %s", err, c.field)
			}
			if got := statsJSON(t, s); got != before {
				t.Fatalf("stats changed:\n%s\n%s", before, got)
			}
			if _, err := s.LabelsBy("new0"); !errors.Is(err, ErrNotFound) {
				t.Errorf("annotator new0 of the failed import still there: %v", err)
			}
		})
	}
	// EachLabel gives the same records as the table.
	i := 0
	err = s.EachLabel(func(r *LabelRecord) error {
		if r.Item != tab.Item[i] || r.Class != tab.Class[i] || r.N != uint64(i) {
			return fmt.Errorf("label %d: %+v", i, *r)
		}
		i++
		return nil
	})
	if err != nil || i != 5 {
		t.Errorf("EachLabel: %v after %d", err, i)
	}
}

func TestLabelEncodingRoundTrip(t *testing.T) {
	for _, r := range []LabelRecord{
		{},
		{Item: 1<<32 - 1, Annotator: 7, Class: 65535, Time: -5, Seconds: 0.25},
		{Item: 3, Annotator: 1 << 20, Class: 2, Time: time.Now().UnixNano()},
	} {
		var got LabelRecord
		r.Wave = 1 // no wave written: wave 1
		if err := decodeLabel(encodeLabel(&r), &got); err != nil || got != r {
			t.Errorf("round trip %+v → %+v, %v", r, got, err)
		}
	}
	var r LabelRecord
	if err := decodeLabel([]byte{0x80}, &r); err == nil {
		t.Error("truncated record decoded")
	}
}

func TestGoldAnnotatorsAudit(t *testing.T) {
	s := newStore(t)
	clock := time.Date(2025, 1, 2, 3, 4, 5, 0, time.UTC)
	s.Now = func() time.Time { return clock }
	s.PutItems(textItems(3, "i"), false, "loop items add p f.csv")
	if _, err := s.PutGold([]handoff.Gold{{Item: "i000", Class: "a", Source: "expert"}}, "g1"); err != nil {
		t.Fatal(err)
	}
	res, err := s.PutGold([]handoff.Gold{{Item: "i000", Class: "b"}, {Item: "i001", Class: "c"}}, "g2")
	if err != nil || res.Added != 1 || res.Updated != 1 {
		t.Fatalf("gold replace: %+v %v", res, err)
	}
	for _, g := range [][]handoff.Gold{
		{{Item: "zz", Class: "a"}},
		{{Item: "i002", Class: "nope"}},
		{{Item: "i002", Class: "a"}, {Item: "i002", Class: "b"}},
	} {
		if _, err := s.PutGold(g, "bad"); err == nil {
			t.Errorf("PutGold(%+v) succeeded", g)
		}
	}
	gold, _ := s.Gold()
	if len(gold) != 2 || gold[0].Class != "b" {
		t.Errorf("gold %+v", gold)
	}
	if _, err := s.PutAnnotators([]handoff.Annotator{{ID: "ann", Name: "Ann"}}, "adm"); err != nil {
		t.Fatal(err)
	}
	s.PutLabels([]handoff.Label{{Item: "i000", Annotator: "ann", Class: "a"}}, "l")
	as, _ := s.Annotators()
	if len(as) != 1 || as[0].Name != "Ann" {
		t.Errorf("annotators %+v", as)
	}
	log, _ := s.Audit()
	var actions []string
	for _, e := range log {
		actions = append(actions, e.Action)
	}
	want := []string{"init", "items.add", "gold.add", "gold.add", "annotators.put", "labels.add"}
	if !reflect.DeepEqual(actions, want) {
		t.Errorf("audit actions %v, want %v (failed imports leave no entry)", actions, want)
	}
	if log[1].Source != "loop items add p f.csv" || !log[1].Time.Equal(clock) || log[1].Detail != "3 added, 0 updated" || log[1].N != 1 {
		t.Errorf("audit entry %+v", log[1])
	}
}

func TestResultsAndPeople(t *testing.T) {
	s := newStore(t)
	s.PutItems(textItems(3, "i"), false, "t")
	cs := []handoff.Consensus{{Item: "i000", Class: "a", Posterior: []float64{0.8, 0.1, 0.1}, Method: "majority", Labels: 3}}
	if err := s.PutConsensus(cs, []byte(`{"m":1}`), "c"); err != nil {
		t.Fatal(err)
	}
	if err := s.PutConsensus([]handoff.Consensus{{Item: "zz"}}, nil, "c"); err == nil {
		t.Error("consensus for an unknown item accepted")
	}
	got, meta, err := s.Consensus()
	if err != nil || !reflect.DeepEqual(got, cs) || string(meta) != `{"m":1}` {
		t.Errorf("Consensus() = %+v %s %v", got, meta, err)
	}
	if _, _, err := s.LatestModel(); !errors.Is(err, ErrNotFound) {
		t.Errorf("LatestModel on empty: %v", err)
	}
	s.PutModel("v1", []byte("one"), "m")
	s.PutModel("v2", []byte("two"), "m")
	s.PutModel("v1", []byte("uno"), "m")
	if v, d, _ := s.LatestModel(); v != "v1" || string(d) != "uno" {
		t.Errorf("LatestModel = %s %s", v, d)
	}
	if d, _ := s.Model("v2"); string(d) != "two" {
		t.Errorf("Model(v2) = %s", d)
	}
	s.CommitRound(RoundWrite{Round: 2, Record: []byte("r2")}, "r")
	s.CommitRound(RoundWrite{Round: 1, Record: []byte("r1")}, "r")
	if rs, _ := s.Rounds(); len(rs) != 2 || rs[0].N != 1 || string(rs[1].Data) != "r2" {
		t.Errorf("Rounds = %+v", rs)
	}
	s.PutSelection(1, []byte("sel"), "s")
	if d, err := s.Selection(1); err != nil || string(d) != "sel" {
		t.Errorf("Selection = %s %v", d, err)
	}
	if _, err := s.Selection(9); !errors.Is(err, ErrNotFound) {
		t.Errorf("Selection(9) = %v", err)
	}
	ml := handoff.MachineLabel{Item: "i001", Class: "b", Confidence: 0.9, Model: "v1", Round: 1}
	if err := s.CommitRound(RoundWrite{Round: 2, Machine: []handoff.MachineLabel{ml}}, "a"); err != nil {
		t.Fatal(err)
	}
	var got2 []handoff.MachineLabel
	s.MachineLabels(func(m handoff.MachineLabel) error { got2 = append(got2, m); return nil })
	if len(got2) != 1 || got2[0].Confidence != 0.9 {
		t.Errorf("MachineLabels = %+v", got2)
	}
	s.PutPerson("ann", []byte("p"), "api")
	s.PutToken("h1", []byte("tok"), "api")
	if d, _ := s.Person("ann"); string(d) != "p" {
		t.Error("Person")
	}
	if d, _ := s.Token("h1"); string(d) != "tok" {
		t.Error("Token")
	}
	s.DeleteToken("h1", "api")
	if _, err := s.Token("h1"); !errors.Is(err, ErrNotFound) {
		t.Error("token not deleted")
	}
	people := 0
	s.People(func(string, []byte) error { people++; return nil })
	if people != 1 {
		t.Errorf("people %d", people)
	}
}

func TestImportStopsOnReaderError(t *testing.T) {
	s := newStore(t)
	s.ImportChunk = 2
	before := statsJSON(t, s)
	i := 0
	boom := errors.New("boom")
	_, err := s.ImportItems("t", false, func() (handoff.Item, error) {
		i++
		if i == 6 {
			return handoff.Item{}, boom
		}
		if i > 6 {
			return handoff.Item{}, io.EOF
		}
		return handoff.Item{ID: fmt.Sprint(i), Kind: handoff.KindText, Text: "x"}, nil
	})
	if !errors.Is(err, boom) {
		t.Fatalf("err = %v", err)
	}
	if got := statsJSON(t, s); got != before {
		t.Fatal("stats changed")
	}
}
