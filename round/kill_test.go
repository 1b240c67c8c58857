package round

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"handoff"
	"handoff/store"
)

// TestRoundChild is the child process of TestKillDuringRound: it runs one
// forced round on the project named by HANDOFF_ROUND_CHILD and exits.
func TestRoundChild(t *testing.T) {
	dir := os.Getenv("HANDOFF_ROUND_CHILD")
	if dir == "" {
		t.Skip("the child of TestKillDuringRound")
	}
	st, err := store.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	cfg := DefaultConfig()
	cfg.Batch = 60
	cfg.Verdict.Bootstrap = 200
	if _, err := RunWith(st, RunOptions{Config: &cfg, Force: true}, "child"); err != nil {
		t.Fatal(err)
	}
}

// TestKillDuringRound kills a process running a round with SIGKILL at
// random moments: every time, the store opens clean (bbolt's consistency
// check passes), and the latest round is whole — its record, model,
// selection, state and scores, and its follow-up question's consensus,
// scores and model, all belong to the same round — because a round is one
// write transaction.
func TestKillDuringRound(t *testing.T) {
	if testing.Short() {
		t.Skip("runs rounds in child processes and kills them")
	}
	if os.Getenv("HANDOFF_ROUND_CHILD") != "" {
		t.Skip("in the child")
	}
	base := t.TempDir()
	st, d := smallProject(t, base, 9)
	dir := filepath.Join(base, "p")
	// A follow-up question, so that the round also writes its part.
	first := st.Codebook().Classes[0].Key
	if _, err := st.AddQuestion(handoff.Question{Key: "severity", Question: "How bad?", Scale: handoff.Ordinal,
		Classes: []handoff.Class{{Key: "1"}, {Key: "2"}, {Key: "3"}}, When: &handoff.Condition{Question: "main", In: []string{first}}}, "test"); err != nil {
		t.Fatal(err)
	}
	items, _, _ := d.Of(handoff.KindText)
	var ls []handoff.Label
	for i, it := range items {
		ls = append(ls, handoff.Label{Item: it.ID, Annotator: fmt.Sprintf("sev%d", i%4), Question: "severity", Class: fmt.Sprint(1 + i%3)})
	}
	if _, err := st.PutLabels(ls, "test"); err != nil {
		t.Fatal(err)
	}
	cfg := DefaultConfig()
	cfg.Batch = 60
	cfg.Verdict.Bootstrap = 200
	if _, err := Run(st, cfg, "test"); err != nil {
		t.Fatal(err)
	}
	st.Close()
	child := func() *exec.Cmd {
		c := exec.Command(os.Args[0], "-test.run=^TestRoundChild$", "-test.count=1")
		c.Env = append(os.Environ(), "HANDOFF_ROUND_CHILD="+dir)
		return c
	}
	// How long a child takes from start to exit, round included: the
	// fastest of three runs (the first is often slowed by a cold cache or a
	// busy machine, and a too-long estimate lets children finish unkilled).
	var took time.Duration
	for r := 0; r < 3; r++ {
		t0 := time.Now()
		if out, err := child().CombinedOutput(); err != nil {
			t.Fatalf("child: %v\n%s", err, out)
		}
		if d := time.Since(t0); r == 0 || d < took {
			took = d
		}
	}
	rng := rand.New(rand.NewPCG(11, 11))
	kills, completed := 0, 0
	// Up to 30 children, until 8 were killed mid-way: a child that
	// finished before its signal shows the machine is faster than the
	// estimate, which then shrinks to that child's time.
	for k := 0; k < 30 && kills < 8; k++ {
		c := child()
		t0 := time.Now()
		if err := c.Start(); err != nil {
			t.Fatal(err)
		}
		// Kill anywhere in the child's run, its last quarter (where the
		// round writes) as often as the rest.
		f := 0.05 + 0.7*rng.Float64()
		if k%2 == 1 {
			f = 0.75 + 0.23*rng.Float64()
		}
		time.Sleep(time.Duration(f * float64(took)))
		c.Process.Signal(syscall.SIGKILL)
		err := c.Wait()
		if err == nil {
			completed++
			took = min(took, time.Since(t0))
		} else {
			kills++
		}
		checkWholeRound(t, dir, k)
	}
	t.Logf("%d kills, %d rounds completed before the signal (a child runs for %v)", kills, completed, took)
	if kills < 8 {
		t.Errorf("only %d children were killed mid-way: the test did not exercise a crash", kills)
	}
}

// checkWholeRound opens the project and checks that the latest round is
// whole.
func checkWholeRound(t *testing.T, dir string, k int) {
	t.Helper()
	st, err := store.Open(dir)
	if err != nil {
		t.Fatalf("kill %d: the store does not open: %v", k, err)
	}
	defer st.Close()
	if err := st.Check(); err != nil {
		t.Fatalf("kill %d: consistency check: %v", k, err)
	}
	rs, err := st.Rounds()
	if err != nil || len(rs) == 0 {
		t.Fatalf("kill %d: rounds %d, %v", k, len(rs), err)
	}
	last := rs[len(rs)-1]
	var r Result
	if err := json.Unmarshal(last.Data, &r); err != nil {
		t.Fatalf("kill %d: round %d record: %v", k, last.N, err)
	}
	s := stateOf(t, st)
	if s.Round != last.N || r.Round != last.N {
		t.Fatalf("kill %d: state says round %d, the latest record is round %d", k, s.Round, last.N)
	}
	if _, err := st.Model(r.Model); err != nil {
		t.Fatalf("kill %d: round %d's model %s: %v", k, last.N, r.Model, err)
	}
	if _, err := st.Selection(last.N); err != nil {
		t.Fatalf("kill %d: round %d's selection: %v", k, last.N, err)
	}
	b, err := st.State(scoresState)
	if err != nil {
		t.Fatalf("kill %d: scores: %v", k, err)
	}
	sc, err := decodeScores(b)
	if err != nil || sc.Round != last.N || sc.Model != r.Model {
		t.Fatalf("kill %d: scores of round %d (%v), the latest round is %d", k, sc.Round, err, last.N)
	}
	if _, meta, err := st.Consensus(); err != nil || meta == nil {
		t.Fatalf("kill %d: consensus: %v", k, err)
	}
	if len(r.Questions) != 2 || r.Questions[1].Model == "" {
		t.Fatalf("kill %d: round %d has no follow-up machine: %+v", k, last.N, r.Questions)
	}
	q := r.Questions[1]
	b, err = st.State(questionScoresState(q.Key))
	if err != nil {
		t.Fatalf("kill %d: scores of %s: %v", k, q.Key, err)
	}
	if sc, err := decodeScores(b); err != nil || sc.Round != last.N || sc.Model != q.Model {
		t.Fatalf("kill %d: %s's scores are of round %d (%v), the latest round is %d", k, q.Key, sc.Round, err, last.N)
	}
	if _, rep, err := StoredQuestionConsensus(st, q.Key); err != nil || rep.Items != q.Consensus.Items {
		t.Fatalf("kill %d: %s's consensus: %v", k, q.Key, err)
	}
}
