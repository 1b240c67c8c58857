package store

import (
	"errors"
	"fmt"
	"io"
	"sync"
	"testing"
	"time"

	"handoff"
)

func TestSubmit(t *testing.T) {
	s := newStore(t)
	now := time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC)
	s.Now = func() time.Time { return now }
	if _, err := s.PutItems(textItems(3, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	if err := s.grantLeaseNow(ServiceLease{ID: "L1", Item: "i000", Annotator: "ann", Expires: now.Add(time.Minute)}); err != nil {
		t.Fatal(err)
	}
	if err := s.grantLeaseNow(ServiceLease{ID: "L2", Item: "i001", Annotator: "ann", Expires: now.Add(-time.Second)}); err != nil {
		t.Fatal(err)
	}
	lab := func(item, class string) handoff.Label {
		return handoff.Label{Item: item, Annotator: "ann", Class: class, Time: now, Seconds: 2}
	}
	r, err := s.Submit(Submission{Label: lab("i000", "a"), Key: "k1", Lease: "L1"}, "test")
	if err != nil || r.Duplicate || r.N != 0 || r.Label.Class != "a" {
		t.Fatalf("first submit: %+v %v", r, err)
	}
	// The lease ended with the label.
	if ls, _ := s.ServiceLeases(); len(ls) != 1 || ls[0].ID != "L2" {
		t.Errorf("leases after the label: %+v", ls)
	}
	// A retry is a duplicate, even though its lease is gone.
	r, err = s.Submit(Submission{Label: lab("i000", "a"), Key: "k1", Lease: "L1"}, "test")
	if err != nil || !r.Duplicate || r.N != 0 || !r.Label.Time.Equal(now) {
		t.Errorf("retry: %+v %v", r, err)
	}
	got, found, err := s.LabelByKey("i000", "ann", "k1")
	if err != nil || !found || got.N != 0 {
		t.Errorf("LabelByKey: %+v %v %v", got, found, err)
	}
	if _, found, _ := s.LabelByKey("i000", "ann", "other"); found {
		t.Error("LabelByKey found a label under another key")
	}
	cases := []struct {
		name string
		sub  Submission
		want error
	}{
		{"key reused for another class", Submission{Label: lab("i000", "b"), Key: "k1"}, ErrKeyReused},
		{"second answer on the item", Submission{Label: lab("i000", "b"), Key: "k2"}, ErrAlreadyLabelled},
		{"expired lease", Submission{Label: lab("i001", "b"), Key: "k3", Lease: "L2"}, errLeaseExpired},
		{"unknown lease", Submission{Label: lab("i002", "b"), Key: "k4", Lease: "nope"}, errLeaseUnknown},
		{"lease of another item", Submission{Label: lab("i002", "b"), Key: "k5", Lease: "L2"}, errLeaseMismatch},
	}
	for _, c := range cases {
		if _, err := s.Submit(c.sub, "test"); !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", c.name, err, c.want)
		}
	}
	var de *DataError
	for _, sub := range []Submission{
		{Label: lab("nope", "a"), Key: "x"},
		{Label: lab("i002", "zzz"), Key: "x"},
		{Label: lab("i002", "a"), Key: ""},
		{Label: handoff.Label{Item: "i002", Class: "a"}, Key: "x"},
		{Label: handoff.Label{Item: "i002", Annotator: "ann", Class: "a", Seconds: -1}, Key: "x"},
	} {
		if _, err := s.Submit(sub, "test"); !errors.As(err, &de) {
			t.Errorf("%+v: %v, want a DataError", sub, err)
		}
	}
	if labels, _ := s.Labels(); len(labels) != 1 {
		t.Errorf("%d labels after refusals, want 1", len(labels))
	}
	// A lease checked by the caller is only ended.
	if _, err := s.Submit(Submission{Label: lab("i002", "c"), Key: "k6", Lease: "gone", LeaseChecked: true}, "test"); err != nil {
		t.Errorf("checked lease: %v", err)
	}
	if err := s.Check(); err != nil {
		t.Error(err)
	}
}

// TestSubmitConcurrent sends labels from many goroutines at once (group
// commit) with retries: each is stored once.
func TestSubmitConcurrent(t *testing.T) {
	s := newStore(t)
	if _, err := s.PutItems(textItems(200, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for a := 0; a < 20; a++ {
		wg.Add(1)
		go func(a int) {
			defer wg.Done()
			for k := 0; k < 30; k++ {
				l := handoff.Label{Item: fmt.Sprintf("i%03d", (a*7+k)%200), Annotator: fmt.Sprintf("p%d", a), Class: "a"}
				for try := 0; try < 2; try++ {
					r, err := s.Submit(Submission{Label: l, Key: fmt.Sprintf("%d-%d", a, k)}, "test")
					if err != nil || r.Duplicate != (try == 1) {
						t.Errorf("%+v try %d: %+v %v", l, try, r, err)
					}
				}
			}
		}(a)
	}
	wg.Wait()
	labels, err := s.Labels()
	if err != nil || len(labels) != 600 {
		t.Fatalf("%d labels (%v), want 600", len(labels), err)
	}
	if n, _ := s.IdempotencyKeys(); n != 600 {
		t.Errorf("%d keys", n)
	}
}

// TestSubmitDuringImport checks that a label sent while a chunked import is
// half-way waits for it, so that the import's rollback cannot remove it.
func TestSubmitDuringImport(t *testing.T) {
	s := newStore(t)
	s.ImportChunk = 10
	if _, err := s.PutItems(textItems(50, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	started := make(chan struct{})
	release := make(chan struct{})
	done := make(chan error, 1)
	n := 0
	go func() {
		_, err := s.ImportLabels("import", func() (handoff.Label, error) {
			n++
			if n == 15 { // the first chunk has committed
				close(started)
				<-release
			}
			if n == 25 {
				return handoff.Label{}, errors.New("bad row")
			}
			if n > 30 {
				return handoff.Label{}, io.EOF
			}
			return handoff.Label{Item: "i001", Annotator: fmt.Sprintf("imp%d", n), Class: "b"}, nil
		})
		done <- err
	}()
	<-started
	sub := make(chan error, 1)
	go func() {
		_, err := s.Submit(Submission{Label: handoff.Label{Item: "i002", Annotator: "web", Class: "a"}, Key: "w1"}, "test")
		sub <- err
	}()
	time.Sleep(50 * time.Millisecond)
	close(release)
	if err := <-done; err == nil {
		t.Fatal("the import should fail at row 25")
	}
	if err := <-sub; err != nil {
		t.Fatal(err)
	}
	labels, err := s.Labels()
	if err != nil || len(labels) != 1 || labels[0].Annotator != "web" {
		t.Fatalf("labels after the failed import: %+v %v", labels, err)
	}
}

func TestUnsure(t *testing.T) {
	s := newStore(t)
	if _, err := s.PutItems(textItems(3, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{"a", "b", "a"} {
		if err := s.MarkUnsure("i001", p, "test"); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.MarkUnsure("nope", "a", "test"); err == nil {
		t.Error("unsure mark on an unknown item")
	}
	m, err := s.UnsureCounts()
	if err != nil || len(m) != 1 || m["i001"] != 2 {
		t.Errorf("UnsureCounts = %v, %v", m, err)
	}
}

// A lease stored with GrantLeaseLater is written by a later commit (its own
// after riderDelay when nothing else comes, or a waited-on write's); after
// reports the outcome, and a bad lease gets an error and writes nothing.
func TestGrantLeaseLater(t *testing.T) {
	s := newStore(t)
	now := time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC)
	s.Now = func() time.Time { return now }
	if _, err := s.PutItems(textItems(3, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	wait := func(l ServiceLease) error {
		done := make(chan error, 1)
		s.GrantLeaseLater(l, func(err error) { done <- err })
		select {
		case err := <-done:
			return err
		case <-time.After(5 * time.Second):
			t.Fatalf("lease %q: after never called", l.ID)
			return nil
		}
	}
	// Alone: committed on its own after the delay.
	if err := wait(ServiceLease{ID: "L1", Item: "i000", Annotator: "ann", Expires: now.Add(time.Minute)}); err != nil {
		t.Fatal(err)
	}
	// Riding with a write someone waits on.
	done := make(chan error, 1)
	s.GrantLeaseLater(ServiceLease{ID: "L2", Item: "i001", Annotator: "ann", Expires: now.Add(time.Minute)}, func(err error) { done <- err })
	if err := s.MarkUnsure("i002", "ann", "test"); err != nil {
		t.Fatal(err)
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	// Bad leases: refused, nothing written, the other writes unharmed.
	if err := wait(ServiceLease{ID: "L3", Item: "nope", Annotator: "ann"}); err == nil {
		t.Error("a lease of an unknown item was stored")
	}
	if err := wait(ServiceLease{ID: "", Item: "i000", Annotator: "ann"}); err == nil {
		t.Error("a lease without an id was stored")
	}
	ls, err := s.ServiceLeases()
	if err != nil {
		t.Fatal(err)
	}
	if len(ls) != 2 || ls[0].ID != "L1" || ls[1].ID != "L2" || ls[1].Item != "i001" || !ls[1].Expires.Equal(now.Add(time.Minute)) {
		t.Errorf("stored leases: %+v", ls)
	}
}

// TestChangeLabel changes a person's latest answer: only the latest, only
// one sent through Submit, only within the time allowed.
func TestChangeLabel(t *testing.T) {
	s := newStore(t)
	now := time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC)
	s.Now = func() time.Time { return now }
	if _, err := s.PutItems(textItems(4, "i"), false, "test"); err != nil {
		t.Fatal(err)
	}
	sub := func(item, class, key string) {
		t.Helper()
		if _, err := s.Submit(Submission{Label: handoff.Label{Item: item, Annotator: "ann", Class: class, Time: now}, Key: key}, "test"); err != nil {
			t.Fatal(err)
		}
	}
	sub("i000", "a", "k0")
	sub("i001", "a", "k1")
	if _, err := s.ChangeLabel("ann", "i000", "b", now.Add(-time.Hour), "test"); !errors.Is(err, ErrNotLatest) {
		t.Errorf("changing an older answer: %v", err)
	}
	if _, err := s.ChangeLabel("ann", "i001", "b", now.Add(time.Second), "test"); !errors.Is(err, ErrTooLate) {
		t.Errorf("changing an answer given before notBefore: %v", err)
	}
	if _, err := s.ChangeLabel("ann", "i001", "zz", now, "test"); err == nil {
		t.Error("changed to a class not in the codebook")
	}
	l, err := s.ChangeLabel("ann", "i001", "b", now.Add(-time.Minute), "test")
	if err != nil || l.Class != "b" || l.Item != "i001" || !l.Time.Equal(now) {
		t.Fatalf("change: %+v %v", l, err)
	}
	got, _ := s.LabelsFor("i001")
	if len(got) != 1 || got[0].Class != "b" {
		t.Errorf("stored after the change: %+v", got)
	}
	// A late retry of the first submission is still a duplicate.
	r, err := s.Submit(Submission{Label: handoff.Label{Item: "i001", Annotator: "ann", Class: "a", Time: now}, Key: "k1"}, "test")
	if err != nil || !r.Duplicate || r.Label.Class != "b" {
		t.Errorf("retry after the change: %+v %v", r, err)
	}
	// An imported label is not the person's to change on the page.
	if _, err := s.PutLabels([]handoff.Label{{Item: "i002", Annotator: "ann", Class: "a"}}, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := s.ChangeLabel("ann", "i002", "b", time.Time{}, "test"); !errors.Is(err, ErrNotLatest) {
		t.Errorf("changing an imported label: %v", err)
	}
	if _, err := s.ChangeLabel("nobody", "i002", "b", time.Time{}, "test"); !errors.Is(err, ErrNotLatest) {
		t.Errorf("changing as an unknown person: %v", err)
	}
	audit, _ := s.Audit()
	if last := audit[len(audit)-2]; last.Action != "labels.change" || last.Detail != `label 1: item "i001", class "a" → "b", by "ann"` {
		t.Errorf("audit entry %+v", last)
	}
}

// TestBorrow checks that a borrowed handle's Close leaves the file open and
// that writes through both handles land.
func TestBorrow(t *testing.T) {
	s := newStore(t)
	b := s.Borrow()
	if _, err := b.PutItems(textItems(2, "b"), false, "borrowed"); err != nil {
		t.Fatal(err)
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := s.PutItems(textItems(2, "o"), false, "owner"); err != nil {
		t.Fatalf("the owner's handle after the borrowed one closed: %v", err)
	}
	if n, err := s.ItemCount(); err != nil || n != 4 {
		t.Errorf("items %d %v", n, err)
	}
}

func TestDeleteTokens(t *testing.T) {
	s := newStore(t)
	for _, k := range []string{"t1", "t2", "t3"} {
		if err := s.PutToken(k, []byte(`{}`), "test"); err != nil {
			t.Fatal(err)
		}
	}
	if err := s.DeleteTokens([]string{"t1", "t3", "absent"}, "test"); err != nil {
		t.Fatal(err)
	}
	var left []string
	s.Tokens(func(k string, _ []byte) error { left = append(left, k); return nil })
	if fmt.Sprint(left) != "[t2]" {
		t.Errorf("tokens left %v", left)
	}
}

// grantLeaseNow is GrantLeaseLater that waits for the commit.
func (s *Store) grantLeaseNow(l ServiceLease) error {
	fn, err := grantLease(l)
	if err != nil {
		return err
	}
	return s.batch(fn)
}
