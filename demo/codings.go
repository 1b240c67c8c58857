package demo

import (
	"encoding/csv"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"

	"handoff"
	"handoff/compare"
	"handoff/ingest"
	"handoff/internal/atomicfile"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

// codings gives the demo's reports project what a team brings to show
// that its crowd can be trusted (loop compare), all invented:
//
//   - experts-2019.csv, imported as reference "experts-2019": for 60
//     reports, the share of their sentences about pollution and about
//     litter, as an expert who reads every sentence and errs on 8% of them
//     would give it;
//   - a second crowd wave: the demo crowd labels again (5 labels each, wave
//     2) the crowd-labelled sentences of those reports that the machine did
//     not label;
//   - panel-2024.csv, not imported (the walkthrough imports it): a second
//     panel's labels for 150 crowd-labelled sentences, 5% of them wrong.
//
// The reports project only; other projects are left as they are.
func (r *runner) codings(st *store.Store, dir string, pr project, src string) error {
	d := r.d
	if pr.kind != handoff.KindText {
		return nil
	}
	cb := pr.codebook
	items, _, _ := d.Of(handoff.KindText)
	byParent := map[string][]handoff.Item{}
	for _, it := range items {
		if it.Parent != "" {
			byParent[it.Parent] = append(byParent[it.Parent], it)
		}
	}
	var parents []string
	for p, its := range byParent {
		if len(its) >= 3 {
			parents = append(parents, p)
		}
	}
	sort.Strings(parents)
	var seed uint64
	for _, o := range pr.settings {
		if o.Key == "seed" {
			seed, _ = strconv.ParseUint(o.Value, 10, 64)
		}
	}
	rng := rand.New(rand.NewPCG(seed, 2019))
	rng.Shuffle(len(parents), func(i, j int) { parents[i], parents[j] = parents[j], parents[i] })
	parents = parents[:min(60, len(parents))]
	sort.Strings(parents)
	K := len(cb.Classes)
	coded := func(truth string, e float64) string {
		k, _ := cb.Index(truth)
		if rng.Float64() < e {
			k = (k + 1 + rng.IntN(K-1)) % K
		}
		return cb.Classes[k].Key
	}
	var rows [][]string
	for _, p := range parents {
		n := map[string]int{}
		for _, it := range byParent[p] {
			n[coded(d.Truth[it.ID], 0.08)]++
		}
		for _, q := range []string{sim.Pollution, sim.Litter} {
			rows = append(rows, []string{p, q, strconv.FormatFloat(float64(n[q])/float64(len(byParent[p])), 'f', 3, 64)})
		}
	}
	expertsFile := filepath.Join(dir, "experts-2019.csv")
	if err := writeCSV(expertsFile, []string{"parent", "question", "value"}, rows); err != nil {
		return err
	}
	f, err := os.Open(expertsFile)
	if err != nil {
		return err
	}
	ref, _, err := ingest.ReadReference(f, expertsFile, ingest.CSV, "experts-2019", cb)
	f.Close()
	if err != nil {
		return err
	}
	if err := st.PutReference(*ref, false, src); err != nil {
		return err
	}
	// The second wave: crowd-labelled sentences of those reports that
	// the machine did not label (so the audit is left as it was).
	labelled := map[int]bool{}
	if err := st.EachLabel(func(r *store.LabelRecord) error { labelled[int(r.Item)] = true; return nil }); err != nil {
		return err
	}
	machine := map[string]bool{}
	if err := st.MachineLabels(func(m handoff.MachineLabel) error { machine[m.Item] = true; return nil }); err != nil {
		return err
	}
	var again, all []string
	err = st.EachItem(func(n int, it handoff.Item) error {
		if labelled[n] && !machine[it.ID] {
			all = append(all, it.ID)
			if slices.Contains(parents, it.Parent) {
				again = append(again, it.ID)
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	ls, err := d.Answer(again, 5, r.answer)
	r.answer++
	if err != nil {
		return err
	}
	for i := range ls {
		ls[i].Wave = 2
	}
	if _, err := st.PutLabels(ls, src); err != nil {
		return err
	}
	// The panel's item labels, for the walkthrough.
	rng.Shuffle(len(all), func(i, j int) { all[i], all[j] = all[j], all[i] })
	all = all[:min(150, len(all))]
	sort.Strings(all)
	rows = rows[:0]
	for _, id := range all {
		rows = append(rows, []string{id, coded(d.Truth[id], 0.05)})
	}
	if err := writeCSV(filepath.Join(dir, "panel-2024.csv"), []string{"item", "label"}, rows); err != nil {
		return err
	}
	rep, err := round.Compare(st, round.CompareConfig{Options: compare.Options{Bootstrap: compare.Bootstrap{Reps: 1000}}})
	if err != nil {
		return err
	}
	var expert, waves string
	for _, c := range rep.Comparisons {
		switch {
		case c.Kind == "reference" && len(c.Parents) > 0:
			expert = fmt.Sprintf("crowd vs experts on the %s: r %s over %d reports", c.Parents[0].Label, c.Parents[0].Pearson, c.Parents[0].N)
		case c.Kind == "waves" && c.Items != nil:
			waves = fmt.Sprintf("wave 1 vs 2: Cohen's kappa %s over %d sentences", c.Items.Kappa, c.Items.N)
		}
	}
	r.printf("  expert coding of %d reports (experts-2019) and a second crowd wave of %d labels on %d of their sentences: %s; %s\n",
		len(parents), len(ls), len(again), expert, waves)
	return nil
}

// writeCSV writes a small CSV file through a temporary file.
func writeCSV(path string, header []string, rows [][]string) error {
	return atomicfile.Write(path, 0o666, func(f io.Writer) error {
		w := csv.NewWriter(f)
		w.Write(header)
		w.WriteAll(rows)
		w.Flush()
		return w.Error()
	})
}
