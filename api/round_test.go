package api

import (
	"encoding/json"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"handoff"
	"handoff/sim"
)

// TestRoundFromTheService runs a round through the API on the invented
// demo scenario and reads the verdict, its report and the next batch; the
// pool then hands out the batch's items first.
func TestRoundFromTheService(t *testing.T) {
	if testing.Short() {
		t.Skip("trains a model")
	}
	f := newFixtureWith(t, sim.TopicCodebook(), Config{Practice: -1, Check: -1}, 0, nil, 1)
	d, err := sim.NewDemo(sim.DemoConfig{Dir: filepath.Join(t.TempDir(), "images"), Text: sim.TextConfig{Reports: 120},
		Images: sim.ImageConfig{PerMagnification: 5}, Labelled: 0.5}, 3)
	if err != nil {
		t.Fatal(err)
	}
	f.useDemo(d)
	if r := f.do("GET", "/api/v1/verdict", "boss", nil); r.status != http.StatusConflict || r.json(t)["code"] != "nothing_yet" {
		t.Errorf("verdict before any round: %d %s", r.status, r.body)
	}
	r := f.do("POST", "/api/v1/rounds", "boss", nil)
	if r.status != http.StatusAccepted {
		t.Fatalf("start a round: %d %s", r.status, r.body)
	}
	job := f.waitRound()
	if job.State != "done" {
		t.Fatalf("round job: %+v", job)
	}
	var sum RoundSummary
	json.Unmarshal(job.Result, &sum)
	if sum.Round != 1 || sum.Batch == 0 || sum.Headline == "" {
		t.Errorf("summary %+v", sum)
	}
	r = f.do("GET", "/api/v1/verdict", "boss", nil)
	if r.status != http.StatusOK || !strings.Contains(string(r.body), `"decision"`) {
		t.Errorf("verdict: %d %.200s", r.status, r.body)
	}
	r = f.do("GET", "/api/v1/verdict/report", "boss", nil)
	if r.status != http.StatusOK || !strings.Contains(string(r.body), "<svg") || !strings.Contains(r.header.Get("Content-Security-Policy"), "sandbox") {
		t.Errorf("report: %d %s %.200s", r.status, r.header.Get("Content-Security-Policy"), r.body)
	}
	r = f.do("GET", "/api/v1/next-batch", "boss", nil)
	var nb struct {
		Round int
		Batch []struct{ Item, Reason string }
	}
	if err := json.Unmarshal(r.body, &nb); err != nil || nb.Round != 1 || len(nb.Batch) == 0 {
		t.Fatalf("next batch: %v %s", err, r.body)
	}
	// The annotator's first item is the batch's first item they may take.
	_, item := f.next("ann1")
	inBatch := map[string]bool{}
	for _, b := range nb.Batch {
		inBatch[b.Item] = true
	}
	if !inBatch[item] {
		t.Errorf("first item after the round %q is not from the next batch", item)
	}
	if r := f.do("GET", "/metrics", "boss", nil); !strings.Contains(string(r.body), `handoff_round_duration_seconds_count{result="ok"} 1`) {
		t.Error("round duration not in the metrics")
	}
}

// useDemo loads the text items and labels of an invented demo scenario.
func (f *fixture) useDemo(d *sim.Demo) {
	f.t.Helper()
	var items []handoff.Item
	ids := map[string]bool{}
	for _, it := range d.Items {
		if it.Kind == handoff.KindText {
			items = append(items, it)
			ids[it.ID] = true
		}
	}
	var labels []handoff.Label
	for _, l := range d.Labels {
		if ids[l.Item] {
			labels = append(labels, l)
		}
	}
	if _, err := f.st.PutItems(items, false, "test"); err != nil {
		f.t.Fatal(err)
	}
	if _, err := f.st.PutLabels(labels, "test"); err != nil {
		f.t.Fatal(err)
	}
	if err := f.sv.pool.rebuild(); err != nil {
		f.t.Fatal(err)
	}
}

func (f *fixture) waitRound() RoundJob {
	f.t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for time.Now().Before(deadline) {
		if j := f.sv.rounds.job(); j.State != "running" {
			return j
		}
		time.Sleep(50 * time.Millisecond)
	}
	f.t.Fatal("the round did not finish in 60 s")
	return RoundJob{}
}
