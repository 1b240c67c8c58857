package sim

import (
	"math"
	"reflect"
	"sort"
	"strconv"
	"testing"
	"time"

	"handoff"
)

// roundRobin returns n tasks whose truths cycle through the codebook's classes.
func roundRobin(cb handoff.Codebook, n int, stratum string) []Task {
	tasks := make([]Task, n)
	for i := range tasks {
		tasks[i] = Task{Item: stratum + "t" + strconv.Itoa(i), Truth: cb.Classes[i%len(cb.Classes)].Key, Stratum: stratum}
	}
	return tasks
}

func TestCrowdTypeShares(t *testing.T) {
	for _, tc := range []struct {
		n   int
		mix Mix
	}{
		{40, DefaultMix()},
		{50, DefaultMix()},
		{33, Mix{Careful: 1, Spammer: 1}},
		{100, Mix{Careful: .1, Average: .2, Careless: .3, Spammer: .2, Resubmitter: .2}},
		{7, Mix{Average: 3}},
	} {
		c, err := NewCrowd(CrowdConfig{Annotators: tc.n, Mix: tc.mix}, 5)
		if err != nil {
			t.Fatal(err)
		}
		count := map[Type]int{}
		for _, ty := range c.Types() {
			count[ty]++
		}
		shares := tc.mix.shares()
		var sum float64
		for _, s := range shares {
			sum += s
		}
		total := 0
		for i, ty := range mixTypes {
			want := float64(tc.n) * shares[i] / sum
			if math.Abs(float64(count[ty])-want) >= 1 {
				t.Errorf("n=%d mix %+v: %d %s, want %.1f", tc.n, tc.mix, count[ty], ty, want)
			}
			total += count[ty]
		}
		if total != tc.n || len(c.Annotators) != tc.n {
			t.Errorf("n=%d: %d annotators", tc.n, total)
		}
	}
}

func TestCrowdAccuracyByType(t *testing.T) {
	cb := ParticleCodebook()
	c, err := NewCrowd(CrowdConfig{Annotators: 60, Mix: Mix{Careful: 1, Average: 1, Careless: 1, Spammer: 1}}, 11)
	if err != nil {
		t.Fatal(err)
	}
	labels, err := c.Answer(cb, nil, roundRobin(cb, 3000, ""), 6, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(labels) != 3000*6 {
		t.Fatalf("%d labels, want %d", len(labels), 3000*6)
	}
	types := c.Types()
	right, all := map[Type]float64{}, map[Type]float64{}
	secs := map[Type][]float64{}
	for _, l := range labels {
		ty := types[l.Annotator]
		i, _ := strconv.Atoi(l.Item[1:])
		all[ty]++
		if l.Class == cb.Classes[i%4].Key {
			right[ty]++
		}
		secs[ty] = append(secs[ty], l.Seconds)
	}
	for _, tc := range []struct {
		ty     Type
		lo, hi float64
	}{
		{Spammer, 0.22, 0.28}, // chance is 1/4
		{Careless, 0.52, 0.68},
		{Average, 0.74, 0.86},
		{Careful, 0.88, 0.98},
	} {
		acc := right[tc.ty] / all[tc.ty]
		if acc < tc.lo || acc > tc.hi || all[tc.ty] < 1000 {
			t.Errorf("%s: accuracy %.3f over %v labels, want %.2f–%.2f", tc.ty, acc, all[tc.ty], tc.lo, tc.hi)
		}
	}
	median := func(xs []float64) float64 { sort.Float64s(xs); return xs[len(xs)/2] }
	if s, c := median(secs[Spammer]), median(secs[Careful]); s > 3 || c < 8 {
		t.Errorf("median seconds: spammers %.1f (want ≤ 3), careful %.1f (want ≥ 8)", s, c)
	}
}

func TestOneClassSpammers(t *testing.T) {
	cb := ParticleCodebook()
	c, err := NewCrowd(CrowdConfig{Annotators: 10, Mix: Mix{Spammer: 1}, OneClassSpammers: 0.5}, 2)
	if err != nil {
		t.Fatal(err)
	}
	labels, err := c.Answer(cb, nil, roundRobin(cb, 400, ""), 5, 0)
	if err != nil {
		t.Fatal(err)
	}
	given := map[string]map[string]bool{}
	for _, l := range labels {
		if given[l.Annotator] == nil {
			given[l.Annotator] = map[string]bool{}
		}
		given[l.Annotator][l.Class] = true
	}
	one := 0
	for _, a := range c.Annotators {
		n := len(given[a.ID])
		switch {
		case a.OneClass && n != 1:
			t.Errorf("one-class spammer %s gave %d classes", a.ID, n)
		case !a.OneClass && n != 4:
			t.Errorf("random spammer %s gave %d classes", a.ID, n)
		}
		if a.OneClass {
			one++
		}
	}
	if one != 5 {
		t.Errorf("%d one-class spammers, want 5", one)
	}
}

// The image bias: at low magnification chains are taken for rods the same way
// by everybody, so more labels per item do not remove it.
func TestChainRodBias(t *testing.T) {
	cb := ParticleCodebook()
	c, err := NewCrowd(CrowdConfig{Annotators: 40, Mix: Mix{Careful: .3, Average: .5, Careless: .2}}, 4)
	if err != nil {
		t.Fatal(err)
	}
	rate, majority := map[string]float64{}, map[string]float64{}
	for _, m := range []string{"10", "20", "40"} {
		var tasks []Task
		for i := range 300 {
			tasks = append(tasks, Task{Item: m + "x-chain-" + strconv.Itoa(i), Truth: Chain, Stratum: m})
		}
		labels, err := c.Answer(cb, ImageBias([]int{10, 20, 40}), tasks, 7, 0)
		if err != nil {
			t.Fatal(err)
		}
		rods := map[string]int{}
		first := map[[2]string]bool{}
		var n float64
		for _, l := range labels {
			if first[[2]string{l.Item, l.Annotator}] { // resubmitted copies
				continue
			}
			first[[2]string{l.Item, l.Annotator}] = true
			n++
			if l.Class == Rod {
				rate[m]++
				rods[l.Item]++
			}
		}
		rate[m] /= n
		for _, k := range rods {
			if k >= 4 {
				majority[m]++
			}
		}
		majority[m] /= float64(len(tasks))
	}
	if !(rate["10"] > rate["20"] && rate["20"] > rate["40"] && rate["10"]-rate["40"] > 0.3) {
		t.Errorf("chain → rod label rate by magnification %v, want 10× well above 40×", rate)
	}
	if majority["10"] < 0.35 || majority["40"] > 0.1 {
		t.Errorf("share of chains whose majority of 7 says rod: %v, want ≥ 0.35 at 10× and ≤ 0.10 at 40×", majority)
	}
}

func TestAnswerNextBatch(t *testing.T) {
	cb := TopicCodebook()
	tasks := roundRobin(cb, 60, "")
	tasks[0].Alt, tasks[0].Ambiguity = Litter, 0.5
	run := func() ([]handoff.Label, []handoff.Label, *Crowd) {
		c, err := NewCrowd(CrowdConfig{}, 9)
		if err != nil {
			t.Fatal(err)
		}
		a, err := c.Answer(cb, nil, tasks, 3, 0)
		if err != nil {
			t.Fatal(err)
		}
		b, err := c.Answer(cb, nil, tasks[:30], 2, 1)
		if err != nil {
			t.Fatal(err)
		}
		return a, b, c
	}
	a1, b1, c := run()
	a2, b2, _ := run()
	if !reflect.DeepEqual(a1, a2) || !reflect.DeepEqual(b1, b2) {
		t.Fatal("same seed and calls gave different labels")
	}
	who := map[string]map[string]int{}
	for _, l := range append(append([]handoff.Label{}, a1...), b1...) {
		if who[l.Item] == nil {
			who[l.Item] = map[string]int{}
		}
		who[l.Item][l.Annotator]++
	}
	for i, task := range tasks {
		want := 3
		if i < 30 {
			want = 5
		}
		if got := len(who[task.Item]); got != want {
			t.Errorf("%s: %d distinct annotators, want %d", task.Item, got, want)
		}
	}
	round1 := c.cfg.Start.Add(c.cfg.RoundGap)
	for _, l := range b1 {
		if l.Time.Before(round1) || l.Time.After(round1.Add(48*time.Hour)) {
			t.Fatalf("round-1 label at %v, want within two days after %v", l.Time, round1)
		}
		if l.Seconds < 0.3 {
			t.Fatalf("label with %v seconds", l.Seconds)
		}
	}
}

func TestRunStratified(t *testing.T) {
	cb := ParticleCodebook()
	var tasks []Task
	for _, m := range []string{"10", "40"} {
		tasks = append(tasks, roundRobin(cb, 200, m)...)
	}
	c, err := NewCrowd(CrowdConfig{}, 3)
	if err != nil {
		t.Fatal(err)
	}
	res, err := c.Run(cb, ImageBias([]int{10, 40}), tasks, RunConfig{LabelsPerItem: 4, Labelled: 0.3, Gold: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Truth) != 400 {
		t.Fatalf("truth for %d items, want 400", len(res.Truth))
	}
	cell := map[string]int{}
	labelled := map[string]bool{}
	for _, id := range res.Labelled {
		labelled[id] = true
		cell[id[:2]+res.Truth[id]]++
	}
	for _, m := range []string{"10", "40"} {
		for _, k := range cb.Keys() {
			if cell[m+k] != 15 { // round(0.3 · 50)
				t.Errorf("stratum %s class %s: %d labelled, want 15", m, k, cell[m+k])
			}
		}
	}
	gold := map[string]int{}
	for _, g := range res.Gold {
		if !labelled[g.Item] || g.Class != res.Truth[g.Item] || g.Source != "sim-expert" {
			t.Errorf("bad gold %+v", g)
		}
		gold[g.Item[:2]]++
	}
	if gold["10"] != 6 || gold["40"] != 6 { // round(0.1 · 60)
		t.Errorf("gold per stratum %v, want 6 each", gold)
	}
	for _, l := range res.Labels {
		if !labelled[l.Item] {
			t.Fatalf("label for unselected item %s", l.Item)
		}
	}
}

func TestCrowdErrors(t *testing.T) {
	cb := ParticleCodebook()
	c, _ := NewCrowd(CrowdConfig{}, 1)
	good := []Task{{Item: "x", Truth: Cell}}
	for _, tc := range []struct {
		name  string
		bias  Bias
		tasks []Task
		k     int
		round int
	}{
		{"unknown truth", nil, []Task{{Item: "x", Truth: "blob"}}, 3, 0},
		{"unknown alt", nil, []Task{{Item: "x", Truth: Cell, Alt: "blob", Ambiguity: .2}}, 3, 0},
		{"ambiguity above 1", nil, []Task{{Item: "x", Truth: Cell, Alt: Rod, Ambiguity: 1.5}}, 3, 0},
		{"no labels", nil, good, 0, 0},
		{"negative round", nil, good, 3, -1},
		{"bias rows", Bias{"10": {{1, 0, 0, 0}}}, good, 3, 0},
		{"bias row sum", Bias{"10": {{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}, {0, 0, .5, 0}}}, good, 3, 0},
		{"bias NaN", Bias{"10": {{math.NaN(), 0, 0, 1}, {0, 1, 0, 0}, {0, 0, 1, 0}, {0, 0, 0, 1}}}, good, 3, 0},
	} {
		if _, err := c.Answer(cb, tc.bias, tc.tasks, tc.k, tc.round); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
	}
	for _, tc := range []struct {
		name string
		cfg  CrowdConfig
	}{
		{"negative annotators", CrowdConfig{Annotators: -3}},
		{"negative share", CrowdConfig{Mix: Mix{Careful: 1, Spammer: -0.5}}},
		{"NaN share", CrowdConfig{Mix: Mix{Careful: math.NaN()}}},
		{"one-class above 1", CrowdConfig{OneClassSpammers: 2}},
	} {
		if _, err := NewCrowd(tc.cfg, 1); err == nil {
			t.Errorf("%s: no error", tc.name)
		}
	}
	if _, err := c.Run(cb, nil, []Task{{Item: "x", Truth: Cell}, {Item: "x", Truth: Rod}}, RunConfig{}); err == nil {
		t.Error("duplicate task: no error")
	}
	if _, err := c.Run(cb, nil, good, RunConfig{Labelled: 1.5}); err == nil {
		t.Error("labelled share 1.5: no error")
	}
}

// Each person's confusion matrix is a proper one, and an ordinal codebook's
// mistakes fall mostly on neighbours.
func TestConfusionMatrices(t *testing.T) {
	c, _ := NewCrowd(CrowdConfig{Annotators: 30, Mix: Mix{Careful: 1, Average: 1, Careless: 1}}, 6)
	var near, far float64
	for _, cb := range []handoff.Codebook{TopicCodebook(), UrgencyCodebook()} {
		for i := range c.Annotators {
			m := c.Confusion(cb, i)
			for r, row := range m {
				var sum float64
				for col, v := range row {
					if v < 0 || math.IsNaN(v) {
						t.Fatalf("%s annotator %d: entry %v", cb.Name, i, v)
					}
					sum += v
					if cb.IsOrdinal() && col != r {
						if d := col - r; d == 1 || d == -1 {
							near += v
						} else {
							far += v
						}
					}
				}
				if math.Abs(sum-1) > 1e-12 {
					t.Fatalf("%s annotator %d row %d sums to %v", cb.Name, i, r, sum)
				}
				if row[r] <= 1/float64(len(row)) {
					t.Errorf("%s annotator %d row %d: diagonal %v not above chance", cb.Name, i, r, row[r])
				}
			}
		}
	}
	if near < 2*far {
		t.Errorf("ordinal mistakes: %.2f on neighbours, %.2f further away; want mostly neighbours", near, far)
	}
}

func TestParseCrowdFlags(t *testing.T) {
	for _, tc := range []struct {
		in     string
		lo, hi int
		ok     bool
	}{{"10-70", 10, 70, true}, {"5", 5, 5, true}, {" 3 - 9", 3, 9, true}, {"70-10", 0, 0, false}, {"0", 0, 0, false}, {"a-b", 0, 0, false}} {
		lo, hi, err := ParseLabelRange(tc.in)
		if (err == nil) != tc.ok || lo != tc.lo || hi != tc.hi {
			t.Errorf("ParseLabelRange(%q) = %d, %d, %v", tc.in, lo, hi, err)
		}
	}
	for _, tc := range []struct {
		in   string
		want Shared
		ok   bool
	}{{"c1:c2:0.3", Shared{"c1", "c2", 0.3}, true}, {"c1:c2", Shared{}, false}, {"c1:c2:x", Shared{}, false}} {
		got, err := ParseShared(tc.in)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("ParseShared(%q) = %+v, %v", tc.in, got, err)
		}
	}
}
