package crowd_test

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"sort"
	"testing"

	"handoff"
	"handoff/crowd"
	"handoff/sim"
)

func loadPkg(t *testing.T) ([]string, []string) {
	f, err := os.Open("../testdata/pkgdesc.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var ids, secs []string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct{ ID, Section string }
		json.Unmarshal(sc.Bytes(), &r)
		ids = append(ids, r.ID)
		secs = append(secs, r.Section)
	}
	return ids, secs
}

func TestZZExp(t *testing.T) {
	ids, secs := loadPkg(t)
	set := map[string]bool{}
	for _, s := range secs {
		set[s] = true
	}
	var keys []string
	for k := range set {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	cb := handoff.Codebook{Name: "s", Question: "q"}
	for _, k := range keys {
		cb.Classes = append(cb.Classes, handoff.Class{Key: k, Name: k})
	}
	for _, n := range []int{len(ids), 200} {
		for seed := uint64(1); seed <= 3; seed++ {
			st, err := sim.NewStream(sim.StreamConfig{Shared: []sim.Shared{{From: "science", To: "math", Rate: 0.3}}}, seed)
			if err != nil {
				t.Fatal(err)
			}
			tasks := make([]sim.Task, n)
			for i := 0; i < n; i++ {
				tasks[i] = sim.Task{Item: ids[i], Truth: secs[i]}
			}
			ls, err := st.Answer(cb, nil, tasks, 5, 0)
			if err != nil {
				t.Fatal(err)
			}
			l, ix, err := crowd.Build(ls, &cb, ids[:n])
			if err != nil {
				t.Fatal(err)
			}
			kept, _, err := crowd.Clean(l, nil, crowd.DefaultRules())
			if err != nil {
				t.Fatal(err)
			}
			_ = ix
			line := fmt.Sprintf("n=%d seed=%d ann=%d:", n, seed, l.NAnnotators)
			for _, m := range []string{"majority", "one-coin", "dawid-skene", "hierarchical", "auto"} {
				r, err := crowd.Combine(m, kept, crowd.Options{Seed: 1})
				if err != nil {
					t.Fatal(err)
				}
				ok := 0
				for i := 0; i < n; i++ {
					if keys[r.Class[i]] == secs[i] {
						ok++
					}
				}
				line += fmt.Sprintf(" %s=%.3f(%d,%v)", m, float64(ok)/float64(n), r.Iterations, r.Converged)
				if r.Hier != nil {
					line += fmt.Sprintf("[β=%.1f τ=%.2f δ̄=%.2f]", r.Hier.Beta, r.Hier.SkillSD, r.Hier.SkillMean)
				}
				if r.Choice != nil {
					line += fmt.Sprintf("{%s: %s}", r.Choice.Chosen, r.Choice.Reason)
					for _, c := range r.Choice.Candidates {
						line += fmt.Sprintf(" <%s %.3f %+.3f±%.3f>", c.Method, c.LogLik, c.Diff, c.SE)
					}
				}
			}
			t.Log(line)
			types := st.Types()
			r, _ := crowd.Combine("hierarchical", kept, crowd.Options{Seed: 1})
			sc := crowd.SpammerScores(r)
			per := map[sim.Type][]float64{}
			nl := make([]int, kept.NAnnotators)
			for _, a := range kept.Annotator {
				nl[a]++
			}
			for a, id := range ix.Annotators {
				if nl[a] >= 20 {
					per[types[id]] = append(per[types[id]], sc[a])
				}
			}
			for ty, v := range per {
				sort.Float64s(v)
				t.Logf("   %s n=%d min %.3f med %.3f max %.3f", ty, len(v), v[0], v[len(v)/2], v[len(v)-1])
			}
			for _, th := range []float64{0.05, 0.1, 0.15, 0.2} {
				rl := crowd.DefaultRules()
				rl.Spammers, rl.SpammerMinLabels, rl.SpammerBelow = true, 20, th
				k2, _, sum := crowd.DropSpammers(kept, r, rl)
				r2, _ := crowd.Combine("hierarchical", k2, crowd.Options{Seed: 1})
				ok := 0
				for i := 0; i < n; i++ {
					if keys[r2.Class[i]] == secs[i] {
						ok++
					}
				}
				t.Logf("   spam<%.2f dropped %d: acc %.3f", th, sum.Annotators, float64(ok)/float64(n))
			}
		}
	}
}
