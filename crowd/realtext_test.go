package crowd_test

import (
	"bufio"
	"encoding/json"
	"os"
	"slices"
	"testing"

	"handoff"
	"handoff/crowd"
	"handoff/sim"
)

// pkgdesc reads the real package descriptions of testdata/pkgdesc.jsonl
// (Debian 12 main package index; see testdata/README.md): ids, the archive
// section of each (the truth here) and the codebook of the 10 sections.
func pkgdesc(t *testing.T) ([]string, []string, handoff.Codebook) {
	t.Helper()
	f, err := os.Open("../testdata/pkgdesc.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var ids, secs []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct{ ID, Section string }
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatal(err)
		}
		ids = append(ids, r.ID)
		secs = append(secs, r.Section)
	}
	keys := slices.Clone(secs)
	slices.Sort(keys)
	keys = slices.Compact(keys)
	cb := handoff.Codebook{Name: "sections", Question: "Which archive section?"}
	for _, k := range keys {
		cb.Classes = append(cb.Classes, handoff.Class{Key: k, Name: k})
	}
	return ids, secs, cb
}

// realisticCrowd has a simulated crowd of the kind a project really gets
// (sim.Stream: people give 10–70 labels each and leave; careful, average and
// careless people, spammers — some always giving one class — and
// resubmitters; everyone but the careful takes science for math 30% of the
// time) label the first n items, 5 labels each, and cleans the labels with
// the default rules.
func realisticCrowd(t *testing.T, n int, seed uint64) (*crowd.Labels, []string, []string, handoff.Codebook) {
	t.Helper()
	ids, secs, cb := pkgdesc(t)
	st, err := sim.NewStream(sim.StreamConfig{Shared: []sim.Shared{{From: "science", To: "math", Rate: 0.3}}}, seed)
	if err != nil {
		t.Fatal(err)
	}
	tasks := make([]sim.Task, n)
	for i := range tasks {
		tasks[i] = sim.Task{Item: ids[i], Truth: secs[i]}
	}
	ls, err := st.Answer(cb, nil, tasks, 5, 0)
	if err != nil {
		t.Fatal(err)
	}
	l, _, err := crowd.Build(ls, &cb, ids[:n])
	if err != nil {
		t.Fatal(err)
	}
	kept, _, err := crowd.Clean(l, nil, crowd.DefaultRules())
	if err != nil {
		t.Fatal(err)
	}
	return kept, ids[:n], secs[:n], cb
}

func accuracy(r *crowd.Result, secs []string, cb handoff.Codebook) float64 {
	ok := 0
	for i, s := range secs {
		if cb.Classes[r.Class[i]].Key == s {
			ok++
		}
	}
	return float64(ok) / float64(len(secs))
}

// TestDefaultOnRealTexts: on real texts with a realistic simulated crowd,
// the default consensus reaches 0.95 against the known sections on all 2,210
// items, and on the first 200 items alone (where every project starts) it is
// at least as accurate as majority vote, and EM converges.
func TestDefaultOnRealTexts(t *testing.T) {
	if testing.Short() {
		t.Skip("about 10 s: skipped with -short")
	}
	for _, tc := range []struct {
		n    int
		seed uint64
	}{{2210, 1}, {2210, 2}, {200, 1}, {200, 2}, {200, 3}, {50, 4}, {100, 5}} {
		l, _, secs, cb := realisticCrowd(t, tc.n, tc.seed)
		def, err := crowd.Combine(crowd.MethodAuto, l, crowd.Options{Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		maj, err := crowd.Majority(l, crowd.Options{Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		a, m := accuracy(def, secs, cb), accuracy(maj, secs, cb)
		t.Logf("%d items, seed %d: default (%s) %.3f, majority %.3f, %d iterations", tc.n, tc.seed, def.Method, a, m, def.Iterations)
		if !def.Converged {
			t.Errorf("%d items, seed %d: EM did not converge in %d iterations", tc.n, tc.seed, def.Iterations)
		}
		if def.Choice == nil || len(def.Choice.Candidates) != 4 || def.Choice.Reason == "" {
			t.Errorf("%d items: the automatic choice gives no evidence: %+v", tc.n, def.Choice)
		}
		if def.Choice != nil && def.Choice.Warning == "" {
			t.Errorf("%d items: no warning that annotators are too sparse for full matrices (median %v labels, 100 cells)", tc.n, def.Choice.MedianLabels)
		}
		if tc.n == 2210 && a < 0.95 {
			t.Errorf("all items, seed %d: default accuracy %.3f, want ≥ 0.95", tc.seed, a)
		}
		if a < m {
			t.Errorf("%d items, seed %d: default accuracy %.3f below majority vote's %.3f", tc.n, tc.seed, a, m)
		}
	}
}

// TestForcedMethodIsKept: --method forces a model; plain Dawid–Skene stays
// available and has no prior.
func TestForcedMethodIsKept(t *testing.T) {
	l, _, _, _ := realisticCrowd(t, 200, 9)
	for _, m := range []string{crowd.MethodMajority, crowd.MethodOneCoin, crowd.MethodDawidSkene, crowd.MethodHierarchical} {
		r, err := crowd.Combine(m, l, crowd.Options{Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		if r.Method != m || r.Choice != nil {
			t.Errorf("forced %s: got method %s, choice %v", m, r.Method, r.Choice)
		}
		if (r.Hier != nil) != (m == crowd.MethodHierarchical) {
			t.Errorf("forced %s: prior %v", m, r.Hier)
		}
	}
}
