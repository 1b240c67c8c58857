package round

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"

	"handoff"
	"handoff/internal/testproject"
	"handoff/selector"
	"handoff/sim"
	"handoff/store"
)

// smallProject is testproject.Small.
var smallProject = testproject.Small

func TestRunIsReproducible(t *testing.T) {
	// The same store and seed give byte-identical rounds, models and
	// selections; another seed changes them.
	var rounds, models [][]byte
	for _, seed := range []uint64{7, 7, 8} {
		st, _ := smallProject(t, t.TempDir(), 3)
		cfg := DefaultConfig()
		cfg.Seed = seed
		cfg.Batch = 50
		cfg.Verdict.Bootstrap = 200
		r, err := Run(st, cfg, "test")
		if err != nil {
			t.Fatal(err)
		}
		rb, _ := st.Round(r.Round)
		mb, _ := st.Model(r.Model)
		rounds = append(rounds, rb)
		models = append(models, mb)
	}
	if !bytes.Equal(rounds[0], rounds[1]) || !bytes.Equal(models[0], models[1]) {
		t.Error("two runs with the same store and seed differ")
	}
	if bytes.Equal(rounds[0], rounds[2]) {
		t.Error("a different seed gave the same round")
	}
}

// stateOf reads the rounds' state.
func stateOf(t *testing.T, st *store.Store) *state {
	t.Helper()
	b, err := st.State(stateName)
	if err != nil {
		t.Fatal(err)
	}
	s, err := decodeState(b)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// answer has the demo crowd label a batch.
func answer(t *testing.T, st *store.Store, d *sim.Demo, batch []BatchItem, labels, round int) {
	t.Helper()
	var ids []string
	for _, b := range batch {
		ids = append(ids, b.Item)
	}
	ls, err := d.Answer(ids, labels, round)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(ls, "test"); err != nil {
		t.Fatal(err)
	}
}

func TestHeldOutIsAFixedRandomSample(t *testing.T) {
	// The held-out set is a Bernoulli sample of the archive by a hash of
	// the item id, drawn at the first round: labelled or not, its members
	// are never trained on, picked only as held-out top-ups (unlabelled) or
	// for the reference standard (labelled, below it), and the set does not
	// change as labels arrive.
	st, d := smallProject(t, t.TempDir(), 4)
	cfg := DefaultConfig()
	cfg.Batch = 80
	cfg.HeldOutMin = 150
	cfg.Verdict.Bootstrap = 100
	var first *heldOutSet
	for r := 1; r <= 3; r++ {
		res, err := Run(st, cfg, "test")
		if err != nil {
			t.Fatal(err)
		}
		s := stateOf(t, st)
		if first == nil {
			first = s.HeldOut
			n := 0
			for _, it := range d.Items {
				if it.Kind == handoff.KindText {
					n++
				}
			}
			if want := heldOutShareFor(0.1, 150, n); s.HeldOut.Share != want {
				t.Errorf("held-out share %v, want max(0.1, 150/%d) = %v", s.HeldOut.Share, n, want)
			}
		} else if *s.HeldOut != *first {
			t.Fatalf("round %d: the held-out set changed: %+v → %+v", r, first, s.HeldOut)
		}
		members, labelled := 0, 0
		for _, it := range d.Items {
			if s.HeldOut.member(it) {
				members++
			}
		}
		if res.HeldOutSet != members {
			t.Errorf("round %d: %d members reported, %d by the hash", r, res.HeldOutSet, members)
		}
		counts := map[string]int{}
		ls, _ := st.Labels()
		for _, l := range ls {
			counts[l.Item]++
		}
		for _, it := range d.Items {
			if s.HeldOut.member(it) && counts[it.ID] > 0 {
				labelled++
			}
		}
		if res.Train.Rows+labelled > res.Consensus.Items || res.HeldOut > labelled {
			t.Errorf("round %d: %d training rows, %d labelled members, %d used by the verdict", r, res.Train.Rows, labelled, res.HeldOut)
		}
		byID := map[string]handoff.Item{}
		for _, it := range d.Items {
			byID[it.ID] = it
		}
		for _, b := range res.Batch {
			m := s.HeldOut.member(byID[b.Item])
			switch b.Reason {
			case string(selector.ReasonHeldOut):
				if !m || counts[b.Item] > 0 {
					t.Fatalf("round %d: held-out top-up %s is not an unlabelled member", r, b.Item)
				}
			case string(selector.ReasonStandard):
				if !m || counts[b.Item] == 0 {
					t.Fatalf("round %d: reference request %s is not a labelled member", r, b.Item)
				}
			default:
				if m {
					t.Fatalf("round %d: held-out item %s picked as %s", r, b.Item, b.Reason)
				}
			}
		}
		answer(t, st, d, res.Batch, 3, r)
	}
	// The hash sample is a Bernoulli sample: its share of a large set is
	// near the share asked for (binomial sd √(p(1−p)/n) ≈ 0.003 here).
	in := 0
	for i := range 20000 {
		if heldOutHash(1, fmt.Sprintf("item-%d", i)) < 0.2 {
			in++
		}
	}
	if f := float64(in) / 20000; math.Abs(f-0.2) > 0.012 {
		t.Errorf("hash sample share %.4f, want 0.2 ± 0.012", f)
	}
}

func TestNoNewLabelsChangesNothing(t *testing.T) {
	st, _ := smallProject(t, t.TempDir(), 5)
	cfg := DefaultConfig()
	cfg.Batch = 40
	cfg.Verdict.Bootstrap = 100
	r1, err := Run(st, cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	trail, _ := st.Audit()
	before := stateOf(t, st)
	if _, err := Run(st, cfg, "test"); !errors.Is(err, ErrNoNewLabels) || !errors.Is(err, ErrNothing) {
		t.Fatalf("second round on the same labels: %v, want ErrNoNewLabels", err)
	}
	if after, _ := st.Audit(); len(after) != len(trail) {
		t.Errorf("a refused round wrote %d audit entries", len(after)-len(trail))
	}
	// Forced: a new round, but not a new look, and no new curve or stop
	// point.
	r2, err := RunWith(st, RunOptions{Config: &cfg, Force: true}, "test")
	if err != nil {
		t.Fatal(err)
	}
	s := stateOf(t, st)
	if r2.Round != 2 || r2.Look != r1.Look || r2.NewLabels || len(s.Curve) != len(before.Curve) || len(s.StopPreds) != len(before.StopPreds) {
		t.Errorf("forced round: round %d look %d new %v, curve %d→%d, stop %d→%d", r2.Round, r2.Look, r2.NewLabels,
			len(before.Curve), len(s.Curve), len(before.StopPreds), len(s.StopPreds))
	}
	if r2.Verdict.Stop != nil && len(r2.Verdict.Stop.Kappas) != 0 {
		t.Errorf("a forced round added a stop-rule kappa: %v", r2.Verdict.Stop.Kappas)
	}
}

func TestNextWritesTheRoundsBatch(t *testing.T) {
	st, d := smallProject(t, t.TempDir(), 6)
	cfg := DefaultConfig()
	cfg.Batch = 60
	cfg.Verdict.Bootstrap = 100
	res, err := Run(st, cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	b, err := Next(st, NextConfig{}, "test")
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(b, res.Batch) {
		t.Fatalf("next wrote a different batch from the round's: %d vs %d items", len(b), len(res.Batch))
	}
	// Changed batch settings pick again from the stored scores and store
	// the result as the round's batch.
	b2, err := Next(st, NextConfig{Overrides: []Override{{"batch", "25"}, {"shares", "model-unsure=1"}}}, "test")
	if err != nil {
		t.Fatal(err)
	}
	if len(b2) != 25 {
		t.Fatalf("re-picked batch has %d items, want 25", len(b2))
	}
	for _, x := range b2 {
		if x.Reason != string(selector.ReasonUnsure) {
			t.Fatalf("re-picked batch has a %s pick with shares model-unsure=1", x.Reason)
		}
	}
	b3, _ := Next(st, NextConfig{}, "test")
	if !reflect.DeepEqual(b2, b3) {
		t.Error("the re-picked batch was not stored as the round's batch")
	}
	for _, bad := range []Override{{"batch", "0"}, {"batch", "-5"}, {"max-error", "0.1"}} {
		if _, err := Next(st, NextConfig{Overrides: []Override{bad}}, "test"); !isSettingError(err) {
			t.Errorf("next with %v: %v, want a setting error", bad, err)
		}
	}
	_ = d
}

func isSettingError(err error) bool {
	var se *SettingError
	return errors.As(err, &se)
}

// pickable reports, for the latest round, which unlabelled items of the
// model's kind the next round could still pick: Unlabelled ones (for
// model-unsure) and waiting held-out members (for top-ups).
func pickable(t *testing.T, st *store.Store) (open, stranded []string) {
	t.Helper()
	c, err := loadCurrent(st, false)
	if err != nil {
		t.Fatal(err)
	}
	cr, err := consensus(c.p, c.r.Config.Consensus)
	if err != nil {
		t.Fatal(err)
	}
	pool := buildPool(c.p, cr, c.sc, c.s.HeldOut.Kind, c.s.HeldOut, c.machine, func(int) bool { return true })
	inBatch := map[string]bool{}
	for _, b := range c.batch {
		inBatch[b.Item] = true
	}
	for i, it := range c.p.items {
		if it.Kind != c.s.HeldOut.Kind || cr.nlabels[i] > 0 || c.p.gold[i] >= 0 {
			continue
		}
		switch pool.State[i] {
		case selector.Unlabelled, selector.HeldOutWaiting, selector.Machine:
			open = append(open, it.ID)
		default:
			if !inBatch[it.ID] {
				stranded = append(stranded, it.ID)
			}
		}
	}
	return open, stranded
}

func TestNoItemIsStranded(t *testing.T) {
	// Batches answered only in part: whatever was not labelled stays
	// pickable, round after round.
	st, d := smallProject(t, t.TempDir(), 8)
	cfg := DefaultConfig()
	cfg.Batch = 50
	cfg.HeldOutMin = 100
	cfg.Verdict.Bootstrap = 50
	for r := 1; r <= 4; r++ {
		res, err := Run(st, cfg, "test")
		if err != nil {
			t.Fatal(err)
		}
		open, stranded := pickable(t, st)
		if len(stranded) > 0 {
			t.Fatalf("round %d: %d unlabelled items can no longer be picked: %v", r, len(stranded), stranded[:min(5, len(stranded))])
		}
		if len(open) == 0 {
			t.Fatalf("round %d: nothing left to pick", r)
		}
		answer(t, st, d, res.Batch[:len(res.Batch)/2], 3, r) // half the batch is answered
	}
}

func TestAutolabelNeedsGo(t *testing.T) {
	st, _ := smallProject(t, t.TempDir(), 5)
	cfg := DefaultConfig()
	cfg.Verdict.MaxError = 0.001 // unreachable: the verdict is NOT YET
	cfg.Verdict.Bootstrap = 100
	r, err := Run(st, cfg, "test")
	if err != nil {
		t.Fatal(err)
	}
	if r.Verdict.Decision.Go {
		t.Fatal("expected NOT YET at max-error 0.001")
	}
	if _, err := Autolabel(st, AutolabelConfig{}, "test"); err == nil || !strings.Contains(err.Error(), "NOT YET") {
		t.Fatalf("autolabel without GO: got %v, want a refusal naming NOT YET", err)
	}
	n := 0
	st.MachineLabels(func(handoff.MachineLabel) error { n++; return nil })
	if n != 0 {
		t.Fatalf("refused autolabel wrote %d machine labels", n)
	}
	rep, err := Autolabel(st, AutolabelConfig{Force: true, Threshold: 0.9}, "test")
	if err != nil {
		t.Fatal(err)
	}
	if !rep.Forced || rep.Labelled+rep.Queued != rep.Scored || rep.Labelled == 0 {
		t.Fatalf("forced autolabel: %+v", rep)
	}
	st.MachineLabels(func(m handoff.MachineLabel) error {
		if m.Confidence < 0.9 || m.Model != r.Model || m.Round != r.Round {
			t.Fatalf("machine label %+v below threshold or without provenance", m)
		}
		return nil
	})
	// Audit: random machine-labelled items, each with its reason.
	b, err := Next(st, NextConfig{Audit: 20}, "test")
	if err != nil {
		t.Fatal(err)
	}
	if len(b) != 20 {
		t.Fatalf("audit batch has %d items, want 20", len(b))
	}
	// A second audit takes other items.
	b2, err := Next(st, NextConfig{Audit: 15}, "test")
	if err != nil || len(b2) != 15 {
		t.Fatalf("second audit: %d items, %v", len(b2), err)
	}
	seen := map[string]bool{}
	for _, x := range append(slices.Clone(b), b2...) {
		if seen[x.Item] {
			t.Fatalf("item %s audited twice", x.Item)
		}
		seen[x.Item] = true
	}
	for _, x := range b {
		if x.Reason != string(selector.ReasonAudit) || x.Machine == "" {
			t.Fatalf("audit pick %+v", x)
		}
	}
}

func TestNothingToDo(t *testing.T) {
	st, err := store.Create(t.TempDir(), sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	for name, f := range map[string]func() error{
		"consensus": func() error { _, err := Consensus(st, DefaultConsensus(), "t"); return err },
		"round":     func() error { _, err := Run(st, DefaultConfig(), "t"); return err },
		"autolabel": func() error { _, err := Autolabel(st, AutolabelConfig{}, "t"); return err },
		"next":      func() error { _, err := Next(st, NextConfig{}, "t"); return err },
		"verdict":   func() error { _, err := Verdict(st, VerdictConfig{}); return err },
	} {
		if err := f(); !errors.Is(err, ErrNothing) {
			t.Errorf("%s on an empty project: %v, want ErrNothing", name, err)
		}
	}
}

func TestFoldThatCannotFitIsAnError(t *testing.T) {
	// Every item of class "wildlife" shares one parent, so the grouped
	// fold that holds that parent out trains on one class only: that is an
	// error that says so, not uniform probabilities counted as predictions.
	st, err := store.Create(t.TempDir(), sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var items []handoff.Item
	var labels []handoff.Label
	for i := range 60 {
		it := handoff.Item{ID: fmt.Sprintf("i%02d", i), Kind: handoff.KindText, Parent: fmt.Sprintf("p%02d", i/3), Text: fmt.Sprintf("a report about oil on the river number %d", i)}
		class := "pollution"
		if i < 6 {
			it.Parent, it.Text, class = "birds", fmt.Sprintf("a heron and a kingfisher seen at site %d", i), "wildlife"
		}
		items = append(items, it)
		for a := range 3 {
			labels = append(labels, handoff.Label{Item: it.ID, Annotator: fmt.Sprintf("a%d", a), Class: class})
		}
	}
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	cc := DefaultConsensus()
	cc.Method = "majority"
	if _, err := Consensus(st, cc, "test"); err != nil {
		t.Fatal(err)
	}
	_, err = Train(st, TrainConfig{Folds: 5}, "test")
	if err == nil || !strings.Contains(err.Error(), "cross-validation fold") || !strings.Contains(err.Error(), "one class") {
		t.Fatalf("train with a fold of one class: %v, want an error naming the fold", err)
	}
}
