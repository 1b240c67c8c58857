package main

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"handoff"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

// team is a research team working on testdata/pkgdesc.jsonl (2,210 real
// package descriptions in 10 sections, the section as the known truth)
// through the command line, with a realistic crowd (sim.Stream: people give
// 10–70 labels each and leave; spammers, one-class annotators,
// resubmitters; most people confuse science with math 30% of the time).
type team struct {
	t      *testing.T
	dir    string // scratch files
	proj   string
	cb     handoff.Codebook
	truth  map[string]string
	order  []string // item ids in file order
	crowd  *sim.Stream
	answer int // rounds of answers so far
}

func newTeam(t *testing.T, seed uint64) *team {
	t.Helper()
	f, err := os.Open("../../testdata/pkgdesc.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tm := &team{t: t, dir: t.TempDir(), truth: map[string]string{}}
	tm.proj = filepath.Join(tm.dir, "pkg")
	var items strings.Builder
	secs := map[string]bool{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct{ ID, Text, Section string }
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatal(err)
		}
		tm.truth[r.ID] = r.Section
		tm.order = append(tm.order, r.ID)
		secs[r.Section] = true
		// The section is the truth: it must not reach the project.
		line, _ := json.Marshal(map[string]string{"id": r.ID, "text": r.Text})
		items.Write(line)
		items.WriteByte('\n')
	}
	var keys []string
	for k := range secs {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var cbY strings.Builder
	cbY.WriteString("name: sections\nquestion: Which archive section does this package belong to?\nclasses:\n")
	for _, k := range keys {
		fmt.Fprintf(&cbY, "  - key: %s\n", k)
		tm.cb.Classes = append(tm.cb.Classes, handoff.Class{Key: k, Name: k})
	}
	tm.cb.Name, tm.cb.Question = "sections", "Which archive section does this package belong to?"
	mustLoop(t, "init", tm.proj, "--codebook", write(t, tm.dir, "codebook.yaml", cbY.String()), "--quiet")
	mustLoop(t, "items", "add", tm.proj, write(t, tm.dir, "items.jsonl", items.String()), "--quiet")
	tm.crowd, err = sim.NewStream(sim.StreamConfig{Shared: []sim.Shared{{From: "science", To: "math", Rate: 0.3}}}, seed)
	if err != nil {
		t.Fatal(err)
	}
	return tm
}

// ask has the crowd label the items, 3 labels each, and adds the labels
// with `loop labels add`.
func (tm *team) ask(ids []string) {
	tm.t.Helper()
	tasks := make([]sim.Task, len(ids))
	for i, id := range ids {
		tasks[i] = sim.Task{Item: id, Truth: tm.truth[id]}
	}
	ls, err := tm.crowd.Answer(tm.cb, nil, tasks, 3, tm.answer)
	if err != nil {
		tm.t.Fatal(err)
	}
	tm.answer++
	var b strings.Builder
	w := csv.NewWriter(&b)
	w.Write([]string{"item", "annotator", "label", "time", "seconds"})
	for _, l := range ls {
		w.Write([]string{l.Item, l.Annotator, l.Class, l.Time.Format("2006-01-02T15:04:05.000Z07:00"), fmt.Sprint(l.Seconds)})
	}
	w.Flush()
	mustLoop(tm.t, "labels", "add", tm.proj, write(tm.t, tm.dir, fmt.Sprintf("labels-%03d.csv", tm.answer), b.String()), "--quiet")
}

// readBatch reads a batch file written by `loop next`.
func readBatch(t *testing.T, path string) []round.BatchItem {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var out []round.BatchItem
	for _, r := range rows[1:] {
		out = append(out, round.BatchItem{Item: r[0], Reason: r[1]})
	}
	return out
}

func (tm *team) store() *store.Store {
	tm.t.Helper()
	s, err := store.Open(tm.proj)
	if err != nil {
		tm.t.Fatal(err)
	}
	return s
}

// TestRealTextsWithARealisticCrowd runs the job on real texts as a team
// would, through the command line: 50 gold answers, a 200-item start (the
// gold items among them), then up to 15 rounds of `loop round`, `loop next`
// (a batch of 100, the stored setting), the crowd's answers and `loop labels
// add`. It checks what must hold whatever the verdict says — `loop next`
// writes exactly the round's batch, no item is ever stranded, rounds
// without new labels change nothing, a GO's bound holds against the known
// truth on the autolabelled items, an audit after autolabel returns the
// items asked for — and reports how far the verdict is from GO at max-error
// 0.05 (the target; see the report of issue 11 for the numbers).
func TestRealTextsWithARealisticCrowd(t *testing.T) {
	if testing.Short() {
		t.Skip("15 rounds on 2,210 real texts")
	}
	tm := newTeam(t, 11)
	rng := rand.New(rand.NewPCG(11, 1))
	perm := rng.Perm(len(tm.order))
	var gold strings.Builder
	gold.WriteString("item,label\n")
	var start []string
	for k, i := range perm[:200] {
		id := tm.order[i]
		start = append(start, id)
		if k < 50 {
			fmt.Fprintf(&gold, "%s,%s\n", id, tm.truth[id])
		}
	}
	mustLoop(t, "labels", "add", tm.proj, write(t, tm.dir, "gold.csv", gold.String()), "--gold", "--quiet")
	tm.ask(start)
	mustLoop(t, "config", tm.proj, "set", "batch", "100")

	var res *round.Result
	goAt := 0
	// The learning curve's estimates, checked against the run continued.
	type estimate struct{ round, labels, needed int }
	var estimates []estimate
	for r := 1; r <= 15; r++ {
		var err error
		out := mustLoop(t, "round", tm.proj, "--json", "--quiet")
		res = &round.Result{}
		if err = json.Unmarshal([]byte(out), res); err != nil {
			t.Fatal(err)
		}
		v := res.Verdict
		th := v.Threshold
		if n := v.Decision.LabelsNeeded; n >= 0 {
			estimates = append(estimates, estimate{res.Round, res.Consensus.LabelsIn, n})
		}
		t.Logf("round %2d look %2d: %d labels, %d trained, held-out %d/%d meet the standard, accuracy %.3f; %s; %s",
			res.Round, res.Look, res.Consensus.LabelsIn, res.Train.Rows, res.HeldOut, res.HeldOutSet, v.Agreement.Accuracy.Est, th.Stop, v.Headline())
		// A second round on the same labels changes nothing.
		if r == 1 {
			if out := mustLoop(t, "round", tm.proj); !strings.Contains(out, "no labels new since the last round") {
				t.Errorf("a round without new labels said:\n%s", out)
			}
		}
		// `loop next` writes exactly the batch the round chose.
		bf := filepath.Join(tm.dir, fmt.Sprintf("batch-%02d.csv", r))
		mustLoop(t, "next", tm.proj, "--out", bf, "--quiet")
		batch := readBatch(t, bf)
		if len(batch) != len(res.Batch) {
			t.Fatalf("round %d: next wrote %d items, the round chose %d", r, len(batch), len(res.Batch))
		}
		for i := range batch {
			if batch[i].Item != res.Batch[i].Item || batch[i].Reason != res.Batch[i].Reason {
				t.Fatalf("round %d: next wrote %+v at %d, the round chose %+v", r, batch[i], i, res.Batch[i])
			}
		}
		s := tm.store()
		stranded, err := round.Stranded(s)
		s.Close()
		if err != nil {
			t.Fatal(err)
		}
		if len(stranded) > 0 {
			t.Fatalf("round %d: %d unlabelled items can no longer be picked: %v", r, len(stranded), stranded[:min(5, len(stranded))])
		}
		if v.Decision.Go {
			goAt = r
			break
		}
		var ids []string
		for _, b := range batch {
			ids = append(ids, b.Item)
		}
		tm.ask(ids)
	}
	v := res.Verdict
	// Where the curve gave an estimate, the labels actually needed to reach
	// its target error (the first later round whose point on the fixed
	// evaluation set is at or below it) must be within a factor of 2; a
	// target not reached by the end, with more than twice the estimate
	// spent since, is an estimate too optimistic by more than 2.
	for _, e := range estimates {
		actual := -1
		for _, p := range v.Curve {
			if p.Labels >= e.labels && p.Error <= v.Settings.TargetError {
				actual = p.Labels - e.labels
				break
			}
		}
		spent := res.Consensus.LabelsIn - e.labels
		switch {
		case actual >= 0 && (float64(e.needed) > 2*float64(max(actual, 1)) || 2*float64(e.needed) < float64(actual)):
			t.Errorf("round %d estimated %d more labels; the target was reached after %d", e.round, e.needed, actual)
		case actual < 0 && spent > 2*e.needed:
			t.Errorf("round %d estimated %d more labels; %d more were spent and the target error %.3f is not reached", e.round, e.needed, spent, v.Settings.TargetError)
		default:
			t.Logf("round %d estimated %d more labels (actual: %d; spent since: %d)", e.round, e.needed, actual, spent)
		}
	}
	if len(estimates) == 0 {
		t.Logf("the learning curve gave no estimate in %d rounds (no estimate yet, as the report says)", res.Round)
	}
	{
		s := tm.store()
		cs, _, err := s.Consensus()
		s.Close()
		if err != nil {
			t.Fatal(err)
		}
		wrong, n := 0, 0
		for _, c := range cs {
			if c.Labels > 0 && c.Method != "gold" {
				n++
				if c.Class != tm.truth[c.Item] {
					wrong++
				}
			}
		}
		t.Logf("the consensus errs against the truth on %d of %d crowd-labelled items (%.1f%%)", wrong, n, 100*float64(wrong)/float64(max(n, 1)))
	}
	if goAt == 0 {
		th := v.Threshold
		t.Logf("TARGET MISSED: NOT YET after 15 rounds at max-error %.2f (held back by %v); the last look (%d, α_r %.2g): %s",
			v.Settings.MaxError, v.Decision.HeldBy, v.Settings.Look, v.Settings.LookAlpha, th.Stop)
	} else {
		t.Logf("GO at round %d: %s", goAt, v.Headline())
	}
	// Autolabel: at the verdict's threshold after a GO; otherwise forced at
	// 0.9, as a team would before auditing.
	args := []string{"autolabel", tm.proj, "--json", "--quiet"}
	if goAt == 0 {
		args = append(args, "--force", "--threshold", "0.9")
	}
	var al round.AutolabelReport
	if err := json.Unmarshal([]byte(mustLoop(t, args...)), &al); err != nil {
		t.Fatal(err)
	}
	s := tm.store()
	wrong, n := 0, 0
	s.MachineLabels(func(m handoff.MachineLabel) error {
		n++
		if m.Class != tm.truth[m.Item] {
			wrong++
		}
		return nil
	})
	s.Close()
	if n != al.Labelled {
		t.Errorf("autolabel reported %d machine labels, the store holds %d", al.Labelled, n)
	}
	if goAt > 0 && n > 0 {
		bound := v.Decision.Bound
		what := "the disagreement bound (no gold figure)"
		if v.Truth != nil {
			bound, what = v.Truth.Total, "the bound against the truth"
		}
		rate := float64(wrong) / float64(n)
		t.Logf("machine error against the truth on %d autolabelled items: %.3f; %s: %.3f", n, rate, what, bound)
		if rate > bound {
			t.Errorf("the machine's error against the truth, %.3f on %d autolabelled items, exceeds %s %.3f", rate, n, what, bound)
		}
	}
	// An audit after autolabel returns the items asked for.
	if n >= 30 {
		af := filepath.Join(tm.dir, "audit.csv")
		mustLoop(t, "next", tm.proj, "--audit", "30", "--out", af, "--quiet")
		audit := readBatch(t, af)
		if len(audit) != 30 {
			t.Fatalf("audit after autolabel wrote %d items, want 30", len(audit))
		}
		var ids []string
		for _, b := range audit {
			if b.Reason != "audit" {
				t.Fatalf("audit item %+v", b)
			}
			ids = append(ids, b.Item)
		}
		tm.ask(ids)
		var rep struct {
			Audit *struct{ N, Errors int } `json:"audit"`
		}
		if err := json.Unmarshal([]byte(mustLoop(t, "verdict", tm.proj, "--json")), &rep); err != nil {
			t.Fatal(err)
		}
		if rep.Audit == nil || rep.Audit.N != 30 {
			t.Errorf("the verdict's audit after the audit batch was labelled: %+v, want 30 items", rep.Audit)
		} else {
			t.Logf("audit: %d of %d machine labels differ from the crowd", rep.Audit.Errors, rep.Audit.N)
		}
	} else {
		t.Errorf("only %d machine labels: nothing to audit", n)
	}
}
