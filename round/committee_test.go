package round

import (
	"testing"

	"handoff/selector"
)

func TestCommitteeStrategy(t *testing.T) {
	st, _ := smallProject(t, t.TempDir(), 6)
	cfg := DefaultConfig()
	cfg.Strategy = selector.Committee
	cfg.Batch = 40
	cfg.Verdict.Bootstrap = 100
	r, err := Run(st, cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, b := range r.Batch {
		if b.Reason == string(selector.ReasonUnsure) {
			n++
			if b.Score <= 0 {
				t.Errorf("committee pick %s has vote entropy %g, want > 0", b.Item, b.Score)
			}
		}
	}
	if n == 0 {
		t.Fatal("no model-unsure picks by the committee")
	}
}
