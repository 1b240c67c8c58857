package round

import (
	"bytes"
	"errors"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"handoff"
	"handoff/selector"
	"handoff/sim"
	"handoff/store"
)

// smallProject builds a text project from the invented demo scenario (sim/):
// about 800 sentences, 40% labelled by a simulated crowd at 5 labels each.
func smallProject(t *testing.T, dir string, seed uint64) (*store.Store, *sim.Demo) {
	t.Helper()
	d, err := sim.NewDemo(sim.DemoConfig{
		Dir:      filepath.Join(dir, "images"),
		Text:     sim.TextConfig{Reports: 200},
		Images:   sim.ImageConfig{PerMagnification: 20},
		Labelled: 0.4,
	}, seed)
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Create(filepath.Join(dir, "p"), sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	items, labels, _ := d.Of(handoff.KindText)
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	return st, d
}

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

func TestHeldOutNeverTrainedOrPicked(t *testing.T) {
	st, d := smallProject(t, t.TempDir(), 4)
	cfg := DefaultConfig()
	cfg.Batch = 60
	cfg.Verdict.Bootstrap = 100
	var held map[string]bool
	first := 0
	for r := 1; r <= 3; r++ {
		res, err := Run(st, cfg, "test")
		if err != nil {
			t.Fatal(err)
		}
		s, err := loadState(st)
		if err != nil {
			t.Fatal(err)
		}
		if held != nil {
			for id := range held {
				if !slices.Contains(s.HeldOut, id) {
					t.Fatalf("round %d: held-out item %s left the held-out set", r, id)
				}
			}
		}
		held = setOf(s.HeldOut)
		if r == 1 {
			first = len(s.HeldOut)
		}
		if res.HeldOut != len(s.HeldOut) {
			t.Errorf("round %d: verdict used %d held-out items, state has %d", r, res.HeldOut, len(s.HeldOut))
		}
		if res.Train.Rows+len(s.HeldOut) > res.Consensus.Items {
			t.Errorf("round %d: training rows and held-out overlap", r)
		}
		var ids []string
		for _, b := range res.Batch {
			if held[b.Item] {
				t.Fatalf("round %d: held-out item %s picked as %s", r, b.Item, b.Reason)
			}
			ids = append(ids, b.Item)
		}
		ls, err := d.Answer(ids, 5, r)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := st.PutLabels(ls, "test"); err != nil {
			t.Fatal(err)
		}
	}
	s, _ := loadState(st)
	if len(s.HeldOut) <= first {
		t.Errorf("held-out set was not topped up: %d items, %d at the first round", len(s.HeldOut), first)
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
	for _, x := range b {
		if x.Reason != string(selector.ReasonAudit) || x.Machine == "" {
			t.Fatalf("audit pick %+v", x)
		}
	}
	// Export: machine labels carry their source and model.
	rows, err := Rows(st)
	if err != nil {
		t.Fatal(err)
	}
	src := map[string]int{}
	for _, r := range rows {
		src[r.Source]++
		if r.Source == "machine" && (r.Model == "" || r.Round == 0) {
			t.Fatalf("machine row without provenance: %+v", r)
		}
	}
	if src["machine"] != rep.Labelled || src["crowd"] == 0 {
		t.Fatalf("export sources %v, want %d machine rows", src, rep.Labelled)
	}
	for _, f := range []string{"csv", "jsonl", "parquet"} {
		var buf bytes.Buffer
		if err := WriteRows(&buf, f, rows, sim.TopicCodebook().Keys()); err != nil || buf.Len() == 0 {
			t.Fatalf("export %s: %v", f, err)
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
	} {
		if err := f(); !errors.Is(err, ErrNothing) {
			t.Errorf("%s on an empty project: %v, want ErrNothing", name, err)
		}
	}
}

func TestRollupIntervals(t *testing.T) {
	// Parent a: 3 of 4 items class x; parent b: all y. Shares are exact,
	// intervals contain them, a constant parent has a zero-width interval.
	rows := []Row{
		{Item: "1", Parent: "a", Class: "x"}, {Item: "2", Parent: "a", Class: "x"},
		{Item: "3", Parent: "a", Class: "x"}, {Item: "4", Parent: "a", Class: "y"},
		{Item: "5", Parent: "b", Class: "y"}, {Item: "6", Parent: "b", Class: "y"},
		{Item: "7", Parent: "b"},
	}
	ps, err := Rollup(rows, []string{"x", "y"}, true, RollupConfig{Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 2 || ps[0].Parent != "a" || ps[1].Items != 3 || ps[1].Answered != 2 {
		t.Fatalf("rollup %+v", ps)
	}
	a := ps[0].Shares[0]
	if math.Abs(a.Value-0.75) > 1e-12 || a.Lo > 0.75 || a.Hi < 0.75 || a.Lo >= a.Hi {
		t.Errorf("share of x in a: %+v", a)
	}
	if b := ps[1].Shares[1]; b.Value != 1 || b.Lo != 1 || b.Hi != 1 {
		t.Errorf("share of y in b: %+v", b)
	}
	if p := ps[0].Position; p == nil || math.Abs(p.Value-1.25) > 1e-12 {
		t.Errorf("mean position in a: %+v", p)
	}
}

func TestPlanRedundancyHelps(t *testing.T) {
	cells, err := Plan(PlanConfig{
		Spec:          sim.CrowdSpec{Careful: 0.3, Average: 0.4, Careless: 0.1, Spammer: 0.2, Classes: 3, Items: 600, Annotators: 60},
		LabelsPerItem: []int{1, 5},
		Seeds:         2,
		Seed:          1,
	})
	if err != nil {
		t.Fatal(err)
	}
	acc := map[string]float64{}
	for _, c := range cells {
		acc[c.Method+"@"+string(rune('0'+c.LabelsPerItem))] = c.Accuracy
	}
	if acc["dawid-skene@5"] <= acc["majority@1"] || acc["dawid-skene@5"] < acc["majority@5"] {
		t.Errorf("plan accuracies %v: more labels and Dawid–Skene should help", acc)
	}
}
