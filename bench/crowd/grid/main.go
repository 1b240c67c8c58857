// Command grid measures the consensus methods' accuracy against the truth on
// simulated crowds (invented data: sim.Stream people, simulation only) and on
// real texts with a simulated crowd, and prints the figures as one JSON
// document for bench/crowd/run.sh to turn into tables.
//
// The grid crosses labels per annotator L ∈ {5, 10, 30, 300} with classes
// K ∈ {2, 5, 10}. In each cell a sim.Stream crowd (StreamMix: 25% careful,
// 40% average, 17% careless, 15% spammers of whom 40% give one class only,
// 3% resubmitters) with MinLabels = MaxLabels = L (every person gives L
// labels, then leaves) and one confusion shared by everyone but the careful
// and the spammers — class c0 answered as c1 30% of the time — labels
// -items items whose true classes are drawn uniformly from K invented keys
// c0 … c(K−1), 5 labels per item. The labels go through crowd.Clean with
// crowd.DefaultRules(), then through each method with the tool's options
// (crowd.Options{Seed: 1}, no gold); accuracy is the share of items whose
// consensus class is the true class.
//
// The real-text table: testdata/pkgdesc.jsonl (2,210 package descriptions,
// 10 archive sections; the section is the truth) labelled by a default
// sim.Stream crowd (10–70 labels a person) with the shared confusion
// science → math at 0.3, 5 labels per item, once on all items and once on
// the first 200 items only (the labels of those items, which are the first
// labels the crowd gave: a project that has just started).
//
//	go run ./bench/crowd/grid > bench/crowd/grid.json
package main

import (
	"bufio"
	"encoding/json"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"time"

	"handoff"
	"handoff/crowd"
	"handoff/sim"
)

// Methods are the methods measured; MethodAuto is the tool's default.
var Methods = []string{crowd.MethodMajority, crowd.MethodOneCoin, crowd.MethodDawidSkene, crowd.MethodHierarchical, crowd.MethodAuto}

// Run is one crowd's figures: accuracy per method, and what auto chose.
type Run struct {
	Seed     uint64             `json:"seed"`
	Labels   int                `json:"labels"` // kept after cleaning
	People   int                `json:"people"`
	Accuracy map[string]float64 `json:"accuracy"`
	Chosen   string             `json:"chosen"`
	// Converged per EM method (false: stopped at 200 iterations).
	Converged map[string]bool `json:"converged"`
}

// Cell is one cell of the grid or one real-text case.
type Cell struct {
	Name           string `json:"name"`
	LabelsPerAnnot int    `json:"labels_per_annotator,omitempty"` // 0: the stream's default 10–70
	Classes        int    `json:"classes"`
	Items          int    `json:"items"`
	Runs           []Run  `json:"runs"`
}

func main() {
	items := flag.Int("items", 2000, "items per grid cell")
	seeds := flag.Int("seeds", 5, "crowds (seeds 1…n) per cell")
	perAnn := flag.String("labels", "5,10,30,300", "labels per annotator, the grid's rows")
	classes := flag.String("classes", "2,5,10", "classes, the grid's columns")
	texts := flag.String("texts", "testdata/pkgdesc.jsonl", "real texts (id, text, section) for the second table; empty: none")
	flag.Parse()
	t0 := time.Now()
	out := map[string]any{"load_before": loadavg()}
	var grid []Cell
	for _, l := range ints(*perAnn) {
		for _, k := range ints(*classes) {
			c := Cell{Name: fmt.Sprintf("L=%d, K=%d", l, k), LabelsPerAnnot: l, Classes: k, Items: *items}
			for s := 1; s <= *seeds; s++ {
				run, err := gridRun(l, k, *items, uint64(s))
				if err != nil {
					fail(err)
				}
				c.Runs = append(c.Runs, run)
			}
			fmt.Fprintf(os.Stderr, "grid %s: %v\n", c.Name, meanAcc(c.Runs))
			grid = append(grid, c)
		}
	}
	out["grid"] = grid
	if *texts != "" {
		tc, err := textCells(*texts, *seeds)
		if err != nil {
			fail(err)
		}
		out["texts"] = tc
	}
	out["seconds"] = time.Since(t0).Seconds()
	out["load_after"] = loadavg()
	out["gomaxprocs"] = runtime.GOMAXPROCS(0)
	enc := json.NewEncoder(os.Stdout)
	enc.SetIndent("", " ")
	if err := enc.Encode(out); err != nil {
		fail(err)
	}
}

// gridRun simulates one crowd of the grid and measures every method.
func gridRun(perAnn, k, nItems int, seed uint64) (Run, error) {
	cb := handoff.Codebook{Question: "Which class is this?"}
	for c := 0; c < k; c++ {
		key := fmt.Sprintf("c%d", c)
		cb.Classes = append(cb.Classes, handoff.Class{Key: key, Name: key})
	}
	rng := rand.New(rand.NewPCG(seed, uint64(1000*perAnn+k)))
	ids := make([]string, nItems)
	truth := make([]int, nItems)
	tasks := make([]sim.Task, nItems)
	for i := range ids {
		ids[i] = fmt.Sprintf("i%05d", i)
		truth[i] = rng.IntN(k)
		tasks[i] = sim.Task{Item: ids[i], Truth: cb.Classes[truth[i]].Key}
	}
	st, err := sim.NewStream(sim.StreamConfig{MinLabels: perAnn, MaxLabels: perAnn,
		Shared: []sim.Shared{{From: "c0", To: "c1", Rate: 0.3}}}, seed*7919+uint64(perAnn*16+k))
	if err != nil {
		return Run{}, err
	}
	labels, err := st.Answer(cb, nil, tasks, 5, 0)
	if err != nil {
		return Run{}, err
	}
	return measure(&cb, ids, truth, labels, seed)
}

// measure cleans the labels with the default rules and runs every method.
func measure(cb *handoff.Codebook, ids []string, truth []int, labels []handoff.Label, seed uint64) (Run, error) {
	l, ix, err := crowd.Build(labels, cb, ids)
	if err != nil {
		return Run{}, err
	}
	kept, _, err := crowd.Clean(l, nil, crowd.DefaultRules())
	if err != nil {
		return Run{}, err
	}
	run := Run{Seed: seed, Labels: kept.Len(), People: len(ix.Annotators),
		Accuracy: map[string]float64{}, Converged: map[string]bool{}}
	for _, m := range Methods {
		r, err := crowd.Combine(m, kept, crowd.Options{Seed: 1})
		if err != nil {
			return Run{}, fmt.Errorf("%s: %w", m, err)
		}
		ok := 0
		for i, t := range truth {
			if r.Class[i] == t {
				ok++
			}
		}
		run.Accuracy[m] = float64(ok) / float64(len(truth))
		if m != crowd.MethodMajority {
			run.Converged[m] = r.Converged
		}
		if m == crowd.MethodAuto {
			run.Chosen = r.Method
			if r.Choice != nil {
				run.Chosen = r.Choice.Chosen
			}
		}
	}
	return run, nil
}

// textCells labels the real texts with a simulated crowd, seeds 1…n, and
// measures every method on all items and on the first 200.
func textCells(path string, seeds int) ([]Cell, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var ids, secs []string
	seen := map[string]bool{}
	sc := bufio.NewScanner(f)
	for line := 1; sc.Scan(); line++ {
		var r struct{ ID, Section string }
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			return nil, fmt.Errorf("%s:%d: %w", path, line, err)
		}
		if r.ID == "" || r.Section == "" {
			return nil, fmt.Errorf("%s:%d: need the fields id and section", path, line)
		}
		ids = append(ids, r.ID)
		secs = append(secs, r.Section)
		seen[r.Section] = true
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	var keys []string
	for s := range seen {
		keys = append(keys, s)
	}
	sort.Strings(keys)
	cb := handoff.Codebook{Question: "Which archive section does this package belong to?"}
	for _, k := range keys {
		cb.Classes = append(cb.Classes, handoff.Class{Key: k, Name: k})
	}
	truth := make([]int, len(ids))
	tasks := make([]sim.Task, len(ids))
	for i := range ids {
		truth[i], _ = cb.Index(secs[i])
		tasks[i] = sim.Task{Item: ids[i], Truth: secs[i]}
	}
	const first = 200
	all := Cell{Name: fmt.Sprintf("%s, all %d items", strings.TrimPrefix(path, "testdata/"), len(ids)), Classes: len(keys), Items: len(ids)}
	head := Cell{Name: fmt.Sprintf("%s, the first %d items only", strings.TrimPrefix(path, "testdata/"), first), Classes: len(keys), Items: first}
	for s := 1; s <= seeds; s++ {
		st, err := sim.NewStream(sim.StreamConfig{Shared: []sim.Shared{{From: "science", To: "math", Rate: 0.3}}}, uint64(s))
		if err != nil {
			return nil, err
		}
		labels, err := st.Answer(cb, nil, tasks, 5, 0)
		if err != nil {
			return nil, err
		}
		r, err := measure(&cb, ids, truth, labels, uint64(s))
		if err != nil {
			return nil, err
		}
		all.Runs = append(all.Runs, r)
		// The labels of the first items are the first labels given (one
		// Answer call draws them in task order).
		in := map[string]bool{}
		for _, id := range ids[:first] {
			in[id] = true
		}
		var hl []handoff.Label
		for _, lb := range labels {
			if in[lb.Item] {
				hl = append(hl, lb)
			}
		}
		r, err = measure(&cb, ids[:first], truth[:first], hl, uint64(s))
		if err != nil {
			return nil, err
		}
		head.Runs = append(head.Runs, r)
		fmt.Fprintf(os.Stderr, "texts seed %d: all %v, first %d %v\n", s, all.Runs[s-1].Accuracy, first, r.Accuracy)
	}
	return []Cell{all, head}, nil
}

func meanAcc(runs []Run) map[string]float64 {
	m := map[string]float64{}
	for _, r := range runs {
		for k, v := range r.Accuracy {
			m[k] += v / float64(len(runs))
		}
	}
	return m
}

func ints(s string) []int {
	var out []int
	for _, f := range strings.Split(s, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(f))
		if err != nil || n < 1 {
			fail(fmt.Errorf("%q: want a comma-separated list of positive whole numbers", s))
		}
		out = append(out, n)
	}
	return out
}

// loadavg is the first three fields of /proc/loadavg ("" where there is none).
func loadavg() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return ""
	}
	f := strings.Fields(string(b))
	return strings.Join(f[:min(3, len(f))], " ")
}

func fail(err error) {
	fmt.Fprintln(os.Stderr, "grid:", err)
	os.Exit(1)
}
