package api

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"handoff"
	"handoff/internal/testproject"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

// demoProject writes a text project from the invented demo scenario into
// dir, with the given stored settings and an admin "boss", closes it and
// returns the admin's token.
func demoProject(t *testing.T, dir string, settings []round.Override) string {
	t.Helper()
	d, err := sim.NewDemo(sim.DemoConfig{Dir: filepath.Join(t.TempDir(), "images"), Text: sim.TextConfig{Reports: 150},
		Images: sim.ImageConfig{PerMagnification: 5}, Labelled: 0.5}, 5)
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Create(dir, sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	items, labels, gold := d.Of(handoff.KindText)
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutGold(gold, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := round.SetSettings(st, settings, "test"); err != nil {
		t.Fatal(err)
	}
	tok, err := AddPerson(st, "boss", true, "test")
	if err != nil {
		t.Fatal(err)
	}
	return tok
}

// serve opens the project in dir and serves it; token is the admin's.
func serve(t *testing.T, dir, token string) *fixture {
	t.Helper()
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	f := &fixture{t: t, st: st, clock: &clock{t: time.Date(2026, 3, 1, 9, 0, 0, 0, time.UTC)}, tokens: map[string]string{"boss": token}}
	sv, err := New(st, Config{Practice: -1, Check: -1, Now: f.clock.Now, Logf: t.Logf})
	if err != nil {
		t.Fatal(err)
	}
	f.sv = sv
	f.ts = httptest.NewServer(sv.Handler())
	t.Cleanup(func() { f.ts.Close(); sv.Close(); st.Close() })
	return f
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Dir(to), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(to, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestBoardAndCommandLineGiveTheSameRound: the board's "Run a round" uses
// the project's stored settings, as `loop round` does, so two copies of one
// project give byte-identical round records, models and batches whichever
// way the round was started.
func TestBoardAndCommandLineGiveTheSameRound(t *testing.T) {
	if testing.Short() {
		t.Skip("builds loop and trains two models")
	}
	bin := testproject.BuildLoop(t)
	base := t.TempDir()
	cli, board := filepath.Join(base, "cli"), filepath.Join(base, "board")
	tok := demoProject(t, cli, []round.Override{{Key: "max-error", Value: "0.08"}, {Key: "batch", Value: "40"},
		{Key: "learner", Value: "bayes"}, {Key: "seed", Value: "7"}, {Key: "held-out-min", Value: "120"}})
	copyFile(t, store.Path(cli), store.Path(board))

	if out, err := exec.Command(bin, "round", cli, "--quiet").CombinedOutput(); err != nil {
		t.Fatalf("loop round: %v\n%s", err, out)
	}
	f := serve(t, board, tok)
	if r := f.do("POST", "/api/v1/rounds", "boss", nil); r.status != http.StatusAccepted {
		t.Fatalf("start a round: %d %s", r.status, r.body)
	}
	if j := f.waitRound(); j.State != "done" {
		t.Fatalf("board round: %+v", j)
	}
	bRound, _ := f.st.Round(1)
	bSel, _ := f.st.Selection(1)
	bScores, _ := f.st.State("scores")
	bModelName, bModel, _ := f.st.LatestModel()

	c, err := store.Open(cli)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	cRound, _ := c.Round(1)
	cSel, _ := c.Selection(1)
	cScores, _ := c.State("scores")
	cModelName, cModel, _ := c.LatestModel()
	if len(cRound) == 0 || !bytes.Equal(cRound, bRound) {
		t.Errorf("round records differ (%d and %d bytes)", len(cRound), len(bRound))
	}
	if !bytes.Equal(cSel, bSel) || !bytes.Equal(cScores, bScores) {
		t.Error("next batches or scores differ")
	}
	if cModelName != bModelName || !bytes.Equal(cModel, bModel) {
		t.Errorf("models differ: %s and %s", cModelName, bModelName)
	}
	r, err := round.Latest(c)
	if err != nil {
		t.Fatal(err)
	}
	if r.Config.Verdict.MaxError != 0.08 || r.Config.Batch != 40 || r.Train.Learner != "bayes" {
		t.Errorf("the round did not use the stored settings: max-error %v batch %d learner %s", r.Config.Verdict.MaxError, r.Config.Batch, r.Train.Learner)
	}
}

// post sends body to path as the admin, from any goroutine.
func (f *fixture) post(path, contentType, body string) (int, string, error) {
	req, err := http.NewRequest("POST", f.ts.URL+path, strings.NewReader(body))
	if err != nil {
		return 0, "", err
	}
	req.Header.Set("Authorization", "Bearer "+f.tokens["boss"])
	req.Header.Set("Content-Type", contentType)
	resp, err := f.ts.Client().Do(req)
	if err != nil {
		return 0, "", err
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(b), nil
}

// TestBoardRoundDuringImports starts rounds from the board while items and
// labels are imported through the API: a round reads the project in one
// read transaction, so every round succeeds and sees each import whole or
// not at all.
func TestBoardRoundDuringImports(t *testing.T) {
	if testing.Short() {
		t.Skip("trains several models")
	}
	dir := filepath.Join(t.TempDir(), "p")
	tok := demoProject(t, dir, []round.Override{{Key: "batch", Value: "30"}, {Key: "held-out-min", Value: "100"}})
	f := serve(t, dir, tok)
	f.st.ImportChunk = 7 // imports in several transactions, so a round could see one half-way
	before, _ := f.st.ItemCount()
	for k := 0; k < 8; k++ {
		var wg sync.WaitGroup
		errs := make(chan error, 64)
		stop := make(chan struct{})
		wg.Add(1)
		go func() {
			defer wg.Done()
			for n := 0; ; n++ {
				select {
				case <-stop:
					return
				default:
				}
				var items, labels strings.Builder
				items.WriteString("id,text\n")
				labels.WriteString("item,annotator,label\n")
				for j := 0; j < 25; j++ {
					id := fmt.Sprintf("new-%d-%d-%d", k, n, j)
					fmt.Fprintf(&items, "%s,a new report about the river bank number %d\n", id, j)
					for a := 0; a < 3; a++ {
						fmt.Fprintf(&labels, "%s,imp%d,%s\n", id, a, []string{"pollution", "wildlife", "other"}[(j+a)%3])
					}
				}
				if code, body, err := f.post("/api/v1/items", "text/csv", items.String()); err != nil || code != http.StatusOK {
					errs <- fmt.Errorf("items import: %d %v %s", code, err, body)
					return
				}
				if code, body, err := f.post("/api/v1/labels/import", "text/csv", labels.String()); err != nil || code != http.StatusOK {
					errs <- fmt.Errorf("labels import: %d %v %s", code, err, body)
					return
				}
			}
		}()
		time.Sleep(20 * time.Millisecond)
		if r := f.do("POST", "/api/v1/rounds", "boss", nil); r.status != http.StatusAccepted {
			t.Fatalf("round %d: start: %d %s", k+1, r.status, r.body)
		}
		j := f.waitRound()
		close(stop)
		wg.Wait()
		close(errs)
		for err := range errs {
			t.Fatal(err)
		}
		if j.State != "done" {
			t.Fatalf("round %d started from the board during imports: %s: %s", k+1, j.State, j.Error)
		}
	}
	rs, _ := f.st.Rounds()
	if len(rs) != 8 {
		t.Errorf("%d rounds stored, want 8", len(rs))
	}
	if after, _ := f.st.ItemCount(); after-before < 8*25 {
		t.Errorf("only %d items imported while the rounds ran: the imports did not overlap them", after-before)
	}
}

// TestSettingsBeforeARound: GET /api/v1/settings shows the stored settings
// a board round uses (admins only) and what it would find new; after a
// round with nothing new, pending.fresh is false and a second round
// changes nothing and says why.
func TestSettingsBeforeARound(t *testing.T) {
	if testing.Short() {
		t.Skip("trains a model")
	}
	dir := filepath.Join(t.TempDir(), "p")
	tok := demoProject(t, dir, []round.Override{{Key: "batch", Value: "30"}, {Key: "max-error", Value: "0.07"}, {Key: "held-out-min", Value: "100"}})
	f := serve(t, dir, tok)
	annTok, err := AddPerson(f.st, "ann", false, "test")
	if err != nil {
		t.Fatal(err)
	}
	f.tokens["ann"] = annTok
	if r := f.do("GET", "/api/v1/settings", "ann", nil); r.status != http.StatusForbidden {
		t.Errorf("an annotator read the settings: %d", r.status)
	}
	get := func() SettingsReply {
		t.Helper()
		r := f.do("GET", "/api/v1/settings", "boss", nil)
		var s SettingsReply
		if r.status != http.StatusOK || json.Unmarshal(r.body, &s) != nil {
			t.Fatalf("settings: %d %s", r.status, r.body)
		}
		return s
	}
	s := get()
	want := map[string][2]string{"batch": {"30", "stored"}, "max-error": {"0.07", "stored"}, "confidence": {"0.95", "default"}}
	seen := 0
	for _, x := range s.Settings {
		if w, ok := want[x.Key]; ok {
			seen++
			if x.Value != w[0] || x.Source != w[1] || x.Range == "" || x.Doc == "" {
				t.Errorf("setting %+v, want value %s from %s with its range and doc", x, w[0], w[1])
			}
		}
	}
	if seen != len(want) || len(s.Settings) != len(round.Keys()) {
		t.Errorf("%d settings (%d of the checked ones), want all %d keys", len(s.Settings), seen, len(round.Keys()))
	}
	stats, _ := f.st.Stats()
	if !s.Pending.Fresh || s.Pending.Round != 0 || s.Pending.NewLabels != stats.Labels {
		t.Errorf("before the first round: pending %+v", s.Pending)
	}
	for i, wantUnchanged := range []bool{false, true} {
		if r := f.do("POST", "/api/v1/rounds", "boss", nil); r.status != http.StatusAccepted {
			t.Fatalf("round %d: %d %s", i+1, r.status, r.body)
		}
		j := f.waitRound()
		var res RoundSummary
		if j.State != "done" || json.Unmarshal(j.Result, &res) != nil || res.Unchanged != wantUnchanged {
			t.Fatalf("round %d: %+v %s", i+1, j, j.Result)
		}
		if wantUnchanged && !strings.Contains(res.Headline, "no labels new since the last round") {
			t.Errorf("an unchanged round says %q", res.Headline)
		}
		if s := get(); s.Pending.Fresh || s.Pending.Round != 1 || s.Pending.NewLabels != 0 {
			t.Errorf("after round %d: pending %+v", i+1, s.Pending)
		}
	}
	if rs, _ := f.st.Rounds(); len(rs) != 1 {
		t.Errorf("%d rounds stored, want 1: the round with nothing new ran", len(rs))
	}
}
