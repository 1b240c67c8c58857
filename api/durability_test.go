package api

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"os/exec"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"handoff"
	"handoff/internal/testproject"
	"handoff/store"
)

// server is a `loop serve` subprocess.
type server struct {
	cmd  *exec.Cmd
	base string
}

func startServer(t *testing.T, bin, dir string) *server {
	t.Helper()
	cmd := exec.Command(bin, "serve", dir, "--addr", "127.0.0.1:0", "--practice", "0", "--check", "0",
		"--redundancy", "3", "--rate", "100000", "--burst", "100000")
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(out)
	if !sc.Scan() {
		cmd.Wait()
		t.Fatalf("loop serve printed nothing; stderr: %s", stderr.String())
	}
	line := sc.Text()
	go io.Copy(io.Discard, out)
	i := strings.Index(line, "http://")
	if i < 0 {
		t.Fatalf("no address in %q", line)
	}
	base, _, _ := strings.Cut(line[i:], " ")
	return &server{cmd: cmd, base: base}
}

// TestKillDuringLabelling runs the server as a subprocess, sends labels
// from many annotators at once, kills the server with SIGKILL at 21 random
// moments and restarts it. Every acknowledged label must be stored exactly
// once, no person may have two labels on one item, and the file must pass
// bbolt's consistency check.
func TestKillDuringLabelling(t *testing.T) {
	if testing.Short() {
		t.Skip("builds loop and kills it 21 times")
	}
	const (
		items      = 3000
		annotators = 10
		kills      = 21
	)
	bin := testproject.BuildLoop(t)
	dir := t.TempDir()
	st, err := store.Create(dir, testCodebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	its := make([]handoff.Item, items)
	for i := range its {
		its[i] = handoff.Item{ID: fmt.Sprintf("it%05d", i), Kind: handoff.KindText, Text: fmt.Sprintf("item %d", i)}
	}
	if _, err := st.PutItems(its, false, "test"); err != nil {
		t.Fatal(err)
	}
	tokens := make([]string, annotators)
	for a := range tokens {
		if tokens[a], err = AddPerson(st, fmt.Sprintf("a%02d", a), false, "test"); err != nil {
			t.Fatal(err)
		}
	}
	// Items it00000–it00009 have their 3 labels from an import; a next
	// batch asks for one more on them and for labels on it00010–it00019.
	// Every restart must leave those targets as they are (4 and 3).
	var pre []handoff.Label
	var sel []map[string]string
	for i := 0; i < 20; i++ {
		id := fmt.Sprintf("it%05d", i)
		sel = append(sel, map[string]string{"item": id, "reason": "crowd-split"})
		for k := 0; i < 10 && k < 3; k++ {
			pre = append(pre, handoff.Label{Item: id, Annotator: fmt.Sprintf("imported%d", k), Class: "rivers"})
		}
	}
	if _, err := st.PutLabels(pre, "test"); err != nil {
		t.Fatal(err)
	}
	sb, _ := json.Marshal(sel)
	if err := st.PutSelection(1, sb, "test"); err != nil {
		t.Fatal(err)
	}
	st.Close()
	// The command line adds an admin and prints the token once.
	out, err := exec.Command(bin, "people", "add", dir, "lead", "--admin", "--quiet").Output()
	if err != nil {
		t.Fatalf("loop people add: %v", err)
	}
	leadToken := strings.TrimSpace(string(out))
	if list, err := exec.Command(bin, "people", "list", dir, "--json").Output(); err != nil || !strings.Contains(string(list), `"id": "lead"`) || strings.Contains(string(list), leadToken) {
		t.Fatalf("loop people list: %v %s", err, list)
	}

	var base atomic.Value
	srv := startServer(t, bin, dir)
	base.Store(srv.base)
	req, _ := http.NewRequest("GET", srv.base+"/api/v1/status", nil)
	req.Header.Set("Authorization", "Bearer "+leadToken)
	if resp, err := http.DefaultClient.Do(req); err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("the token from loop people add: %v %v", resp, err)
	} else {
		resp.Body.Close()
	}

	type ack struct {
		item, annotator, key string
		number               float64
	}
	var (
		mu      sync.Mutex
		acked   []ack
		refused int
		stop    atomic.Bool
		wg      sync.WaitGroup
	)
	client := &http.Client{Timeout: 5 * time.Second}
	// send retries a request until the server gives a definitive answer
	// (anything but a connection error or a 5xx), or the test stops.
	send := func(method, path, token string, body []byte, key string) (int, []byte, bool) {
		for {
			req, _ := http.NewRequest(method, base.Load().(string)+path, bytes.NewReader(body))
			req.Header.Set("Authorization", "Bearer "+token)
			if key != "" {
				req.Header.Set("Idempotency-Key", key)
				req.Header.Set("Content-Type", "application/json")
			}
			resp, err := client.Do(req)
			if err == nil {
				b, rerr := io.ReadAll(resp.Body)
				resp.Body.Close()
				if rerr == nil && resp.StatusCode < 500 {
					return resp.StatusCode, b, true
				}
			}
			if stop.Load() && key == "" {
				return 0, nil, false
			}
			time.Sleep(5 * time.Millisecond)
		}
	}
	for a := 0; a < annotators; a++ {
		wg.Add(1)
		go func(a int) {
			defer wg.Done()
			id := fmt.Sprintf("a%02d", a)
			for k := 0; !stop.Load(); k++ {
				code, b, ok := send("GET", "/api/v1/next", tokens[a], nil, "")
				if !ok {
					return
				}
				if code != http.StatusOK {
					t.Errorf("%s next: %d %s", id, code, b)
					return
				}
				var nr NextReply
				if err := json.Unmarshal(b, &nr); err != nil {
					t.Errorf("%s next: %v", id, err)
					return
				}
				if nr.Lease == nil {
					return
				}
				key := fmt.Sprintf("%s-%d", id, k)
				body, _ := json.Marshal(LabelRequest{Lease: nr.Lease.ID, Item: nr.Item.ID, Label: testCodebook.Classes[k%3].Key})
				// A label in flight is always seen through to an answer,
				// even after stop, so that every acknowledgement is known.
				code, b, _ = send("POST", "/api/v1/labels", tokens[a], body, key)
				if code == http.StatusConflict && strings.Contains(string(b), "lease_unknown") {
					// The server was killed after handing out the item but
					// before the lease's stored copy landed, and the label
					// was never stored (a retry of a stored label is
					// answered as a duplicate): fetch the next item.
					mu.Lock()
					refused++
					mu.Unlock()
					continue
				}
				if code != http.StatusCreated && code != http.StatusOK {
					t.Errorf("%s label %s: %d %s", id, key, code, b)
					return
				}
				var lr LabelReply
				json.Unmarshal(b, &lr)
				mu.Lock()
				acked = append(acked, ack{nr.Item.ID, id, key, float64(lr.Number)})
				mu.Unlock()
			}
		}(a)
	}

	nAcked := func() int {
		mu.Lock()
		defer mu.Unlock()
		return len(acked)
	}
	// Each kill comes a random 0–500 ms after the restarted server has
	// acknowledged 15 labels (before its first it is busy verifying tokens,
	// which are hashed with argon2id; waiting for 15 keeps the test
	// exercising the server when the machine is busy and labels come slowly).
	rng := rand.New(rand.NewPCG(20260301, 6))
	for k := 0; k < kills; k++ {
		n0 := nAcked()
		deadline := time.Now().Add(20 * time.Second)
		for nAcked() < n0+15 && time.Now().Before(deadline) {
			time.Sleep(2 * time.Millisecond)
		}
		if nAcked() == n0 {
			t.Fatalf("no label acknowledged for 20 s after restart %d", k)
		}
		time.Sleep(time.Duration(rng.IntN(500)) * time.Millisecond)
		if err := srv.cmd.Process.Signal(syscall.SIGKILL); err != nil {
			t.Fatal(err)
		}
		srv.cmd.Wait()
		// The killed server left its serve.json behind: a command run now
		// sees it is stale and runs as usual; once the next server runs,
		// the same command runs beside it.
		if k%5 == 0 {
			if out, err := exec.Command(bin, "status", dir, "--json").CombinedOutput(); err != nil {
				t.Errorf("loop status after kill %d: %v %s", k, err, out)
			}
		}
		srv = startServer(t, bin, dir)
		base.Store(srv.base)
		if k%5 == 1 {
			if out, err := exec.Command(bin, "people", "list", dir).CombinedOutput(); err != nil || !strings.Contains(string(out), "lead") {
				t.Errorf("loop people list beside the server after kill %d: %v %s", k, err, out)
			}
		}
	}
	time.Sleep(300 * time.Millisecond)
	stop.Store(true)
	wg.Wait()
	srv.cmd.Process.Signal(syscall.SIGTERM)
	srv.cmd.Wait()

	st, err = store.Open(dir)
	if err != nil {
		t.Fatalf("the store does not open after %d kills: %v", kills, err)
	}
	defer st.Close()
	if err := st.Check(); err != nil {
		t.Fatalf("consistency check: %v", err)
	}
	labels, err := st.Labels()
	if err != nil {
		t.Fatal(err)
	}
	count := map[string]int{}
	onItem := map[string]int{}
	for _, l := range labels {
		count[l.Item+"/"+l.Annotator]++
		onItem[l.Item]++
	}
	for item, n := range onItem {
		want := 3
		if item < "it00010" {
			want = 4
		}
		if n > want {
			t.Errorf("%s has %d labels after %d restarts; its target is %d", item, n, kills, want)
		}
	}
	for k, n := range count {
		if n != 1 {
			t.Errorf("%s stored %d times", k, n)
		}
	}
	for _, a := range acked {
		if count[a.item+"/"+a.annotator] != 1 {
			t.Errorf("acknowledged label %s (%s on %s) is stored %d times", a.key, a.annotator, a.item, count[a.item+"/"+a.annotator])
		}
	}
	keys, err := st.IdempotencyKeys()
	if err != nil {
		t.Fatal(err)
	}
	if keys != len(labels)-len(pre) {
		t.Errorf("%d idempotency keys for %d labels", keys, len(labels))
	}
	if len(labels) != len(acked)+len(pre) {
		t.Errorf("%d labels stored, %d acknowledged and %d imported: every stored label should have been acknowledged (retries see duplicates)", len(labels), len(acked), len(pre))
	}
	if len(acked) < 300 {
		t.Errorf("only %d labels acknowledged: the test did not exercise the server", len(acked))
	}
	t.Logf("%d kills; %d labels acknowledged, %d stored; %d answers refused because their lease was lost in a kill", kills, len(acked), len(labels), refused)
}
