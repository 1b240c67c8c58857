package store

import (
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"handoff"
)

// testdata/before-waves/handoff.db was written by the store as it was
// before labels carried a wave (3 items, 4 labels with and without times
// and seconds, 1 gold answer). It must open and read as it did, every
// label in wave 1, and take labels of a new wave beside the old ones.
func TestOpensFileWrittenBeforeWaves(t *testing.T) {
	dir := t.TempDir()
	b, err := os.ReadFile(filepath.Join("testdata", "before-waves", fileName))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(Path(dir), b, 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	t0 := time.Date(2025, 6, 1, 12, 0, 0, 0, time.UTC)
	want := []handoff.Label{
		{Item: "i1", Annotator: "ann1", Class: "a", Time: t0, Seconds: 4.5},
		{Item: "i1", Annotator: "ann2", Class: "b"},
		{Item: "i2", Annotator: "ann1", Class: "c", Time: t0.Add(time.Minute)},
		{Item: "i3", Annotator: "ann2", Class: "a", Seconds: 2},
	}
	got, err := s.Labels()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("labels of the old file:\n got %+v\nwant %+v", got, want)
	}
	if w, _ := s.Wave(); w != 1 {
		t.Errorf("open wave %d, want 1", w)
	}
	if _, err := s.PutLabels([]handoff.Label{{Item: "i1", Annotator: "ann1", Class: "b", Wave: 2, Seconds: 3}, {Item: "i2", Annotator: "ann3", Class: "a", Wave: 2}}, "test"); err != nil {
		t.Fatal(err)
	}
	sn, err := s.Snapshot(SnapshotOptions{Times: true, Waves: true})
	if err != nil {
		t.Fatal(err)
	}
	if w := sn.Labels.Wave; !reflect.DeepEqual(w, []uint16{1, 1, 1, 1, 2, 2}) {
		t.Errorf("waves %v, want four of wave 1 then two of wave 2", w)
	}
	if n := sn.Labels.Len(); n != 6 || len(sn.Gold) != 1 {
		t.Errorf("%d labels, %d gold; want 6 and 1", n, len(sn.Gold))
	}
	ws, err := s.Waves()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(ws, []WaveCount{{Wave: 1, Labels: 4, Items: 3, Open: true}, {Wave: 2, Labels: 2, Items: 2}}) {
		t.Errorf("waves %+v", ws)
	}
}

// Records of wave 1 are the bytes of before; other waves decode back.
func TestLabelRecordWaves(t *testing.T) {
	cases := []LabelRecord{
		{Item: 3, Annotator: 7, Class: 2, Time: 0, Seconds: 0, Wave: 1},
		{Item: 3, Annotator: 7, Class: 2, Time: 12345, Seconds: 1.5, Wave: 1},
		{Item: 300, Annotator: 70000, Class: 9, Time: -5, Seconds: 0, Wave: 2},
		{Item: 1, Annotator: 1, Class: 1, Time: 99, Seconds: 7.25, Wave: 127},
		{Item: 1, Annotator: 1, Class: 1, Time: 99, Seconds: 0, Wave: 128},
		{Item: 1, Annotator: 1, Class: 1, Time: 99, Seconds: 2, Wave: 65535},
	}
	for _, c := range cases {
		b := encodeLabel(&c)
		var r LabelRecord
		r.Wave = 9 // decode must reset it
		if err := decodeLabel(b, &r); err != nil {
			t.Fatalf("%+v: %v", c, err)
		}
		if r != c {
			t.Errorf("round trip %+v → %+v", c, r)
		}
		if c.Wave == 1 {
			old := c
			old.Wave = 0
			if string(encodeLabel(&old)) != string(b) {
				t.Errorf("wave 0 and wave 1 encode differently")
			}
		}
	}
	// Left-over bytes that are not a wave are damage.
	good := encodeLabel(&LabelRecord{Item: 1, Class: 1, Wave: 1})
	for _, bad := range [][]byte{append(good, 1), append(good, 0), append(good, 1, 2, 3, 4)} {
		var r LabelRecord
		if err := decodeLabel(bad, &r); !errors.Is(err, errBadLabel) {
			t.Errorf("% x: error %v, want a damaged record", bad, err)
		}
	}
}

func TestOpenWaveAndImports(t *testing.T) {
	s := newStore(t)
	if _, err := s.PutItems(textItems(6, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := s.PutLabels([]handoff.Label{{Item: "i000", Annotator: "x", Class: "a"}}, "test"); err != nil {
		t.Fatal(err)
	}
	// A bad wave refuses the whole import.
	_, err := s.PutLabels([]handoff.Label{{Item: "i001", Annotator: "x", Class: "a"}, {Item: "i002", Annotator: "x", Class: "a", Wave: 70000}}, "test")
	var de *DataError
	if !errors.As(err, &de) || de.Field != "wave" {
		t.Fatalf("error %v, want a DataError on field wave", err)
	}
	if ls, _ := s.Labels(); len(ls) != 1 {
		t.Fatalf("%d labels after a refused import, want 1", len(ls))
	}
	// An import names wave 3: the next wave opened is 4.
	if _, err := s.PutLabels([]handoff.Label{{Item: "i001", Annotator: "y", Class: "b", Wave: 3}}, "test"); err != nil {
		t.Fatal(err)
	}
	w, err := s.OpenWave("test")
	if err != nil || w != 4 {
		t.Fatalf("OpenWave = %d, %v; want 4", w, err)
	}
	if _, err := s.PutLabels([]handoff.Label{{Item: "i002", Annotator: "z", Class: "c"}}, "test"); err != nil {
		t.Fatal(err)
	}
	ls, _ := s.Labels()
	if got := []int{ls[0].Wave, ls[1].Wave, ls[2].Wave}; !reflect.DeepEqual(got, []int{0, 3, 4}) {
		t.Errorf("waves read back %v, want [0 3 4] (0: wave 1)", got)
	}
	// Through the service: a person who labelled an item in wave 1 may
	// label it again in the open wave, once.
	sub := Submission{Label: handoff.Label{Item: "i000", Annotator: "x", Class: "b"}, Key: "k1"}
	if _, err := s.Submit(sub, "test"); err != nil {
		t.Fatalf("label of a new wave refused: %v", err)
	}
	sub.Key = "k2"
	if _, err := s.Submit(sub, "test"); !errors.Is(err, ErrAlreadyLabelled) {
		t.Errorf("second label in the same wave: %v, want ErrAlreadyLabelled", err)
	}
	ls, _ = s.LabelsFor("i000")
	if len(ls) != 2 || ls[1].Wave != 4 {
		t.Errorf("labels of i000: %+v, want a second one of wave 4", ls)
	}
	var trail strings.Builder
	es, _ := s.Audit()
	for _, e := range es {
		trail.WriteString(e.Action + " ")
	}
	if !strings.Contains(trail.String(), "waves.open") {
		t.Errorf("audit trail lacks waves.open: %s", trail.String())
	}
}
