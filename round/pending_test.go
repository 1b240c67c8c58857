package round

import (
	"errors"
	"testing"

	"handoff"
)

// PendingWork agrees with the test a round applies: fresh before the first
// round, not fresh right after one (and the round then refuses), fresh
// again after one more label or one more gold answer.
func TestPendingWorkMatchesTheRound(t *testing.T) {
	st, d := smallProject(t, t.TempDir(), 6)
	cfg := DefaultConfig()
	cfg.Batch = 30
	cfg.Verdict.Bootstrap = 50
	check := func(when string, fresh bool, newLabels int, gold bool) Pending {
		t.Helper()
		p, err := PendingWork(st)
		if err != nil {
			t.Fatal(err)
		}
		if p.Fresh != fresh || p.NewLabels != newLabels || p.GoldChanged != gold {
			t.Errorf("%s: %+v, want fresh %v, %d new labels, gold changed %v", when, p, fresh, newLabels, gold)
		}
		return p
	}
	stats, _ := st.Stats()
	p := check("before the first round", true, stats.Labels, false)
	if p.Round != 0 || p.Labels != stats.Labels {
		t.Errorf("before the first round: %+v", p)
	}
	r, err := Run(st, cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	if p := check("after round 1", false, 0, false); p.Round != 1 {
		t.Errorf("after round 1: round %d", p.Round)
	}
	if _, err := Run(st, cfg, "test"); !errors.Is(err, ErrNoNewLabels) {
		t.Fatalf("a round with nothing pending ran: %v", err)
	}
	answer(t, st, d, r.Batch[:1], 1, 1)
	check("after one more label", true, 1, false)
	if _, err := Run(st, cfg, "test"); err != nil {
		t.Fatal(err)
	}
	check("after round 2", false, 0, false)
	var extra handoff.Gold
	gold, _ := st.Gold()
	have := map[string]bool{}
	for _, g := range gold {
		have[g.Item] = true
	}
	for _, it := range d.Items {
		if !have[it.ID] && it.Kind == handoff.KindText {
			extra = handoff.Gold{Item: it.ID, Class: d.Truth[it.ID]}
			break
		}
	}
	if _, err := st.PutGold([]handoff.Gold{extra}, "test"); err != nil {
		t.Fatal(err)
	}
	check("after one more gold answer", true, 0, true)
}
