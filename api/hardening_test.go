package api

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/http/cookiejar"
	"strings"
	"sync"
	"testing"
	"time"
)

// labelAll has each annotator take and label items until the pool has
// nothing left for anyone, and returns the labels acknowledged.
func (f *fixture) labelAll(people []string) int {
	f.t.Helper()
	acked := 0
	for progress := true; progress; {
		progress = false
		for _, a := range people {
			lease, item := f.next(a)
			if lease == "" {
				continue
			}
			if r := f.label(a, lease, item, "roads", fmt.Sprintf("%s-%s", a, item)); r.status != http.StatusCreated {
				f.t.Fatalf("%s labels %s: %d %s", a, item, r.status, r.body)
			}
			acked++
			progress = true
		}
	}
	return acked
}

// restart replaces the server by a new one on the same store, as after a
// restart of `loop serve`.
func (f *fixture) restart(cfg Config) {
	f.t.Helper()
	f.ts.Close()
	f.sv.Close()
	cfg.Now, cfg.Logf = f.clock.Now, f.t.Logf
	sv, err := New(f.st, cfg)
	if err != nil {
		f.t.Fatal(err)
	}
	f.sv = sv
	f.ts = newTestServer(sv)
	f.t.Cleanup(func() { f.ts.Close(); sv.Close() })
}

// perItem counts the stored labels of each item.
func perItem(t *testing.T, f *fixture) map[string]int {
	t.Helper()
	n := map[string]int{}
	for _, l := range mustLabels(t, f) {
		n[l.Item]++
	}
	return n
}

// TestRedundancyCapHolds checks the cap on labels per item across server
// restarts, label imports through the API and the pool rebuilds after
// rounds, by counting the stored labels: every item ends with at most
// Redundancy labels, and an item of the next batch with one more than it
// had when the service first saw the batch. A new next batch raises an
// item's target once, by one. (The service used to raise each batch item's
// target to "labels now + 1" at every start, import and round.)
func TestRedundancyCapHolds(t *testing.T) {
	for _, redundancy := range []int{1, 3} {
		t.Run(fmt.Sprintf("redundancy %d", redundancy), func(t *testing.T) {
			cfg := Config{Practice: -1, Check: -1, Redundancy: redundancy}
			f := newFixture(t, cfg, 6, nil, 8)
			var people []string
			for i := 1; i <= 8; i++ {
				people = append(people, fmt.Sprintf("ann%d", i))
			}
			// t000 is already at its target from an import; the next batch
			// (round 1) wants one more label on it and labels on t001.
			var rows strings.Builder
			rows.WriteString("item,annotator,label\n")
			for i := 0; i < redundancy; i++ {
				fmt.Fprintf(&rows, "t000,imported%d,rivers\n", i)
			}
			if r := f.do("POST", "/api/v1/labels/import", "boss", rows.String(), "Content-Type", "text/csv"); r.status != http.StatusOK {
				t.Fatalf("import: %d %s", r.status, r.body)
			}
			if err := f.st.PutSelection(1, []byte(`[{"item":"t000","reason":"crowd-split"},{"item":"t001","reason":"model-unsure"}]`), "test"); err != nil {
				t.Fatal(err)
			}
			if err := f.sv.pool.rebuild(); err != nil { // as after a round
				t.Fatal(err)
			}
			want := map[string]int{"t000": redundancy + 1}
			check := func(when string) {
				t.Helper()
				f.labelAll(people)
				got := perItem(t, f)
				for i := 0; i < 6; i++ {
					id := fmt.Sprintf("t%03d", i)
					w := redundancy
					if v, ok := want[id]; ok {
						w = v
					}
					if got[id] != w {
						t.Errorf("%s: %s has %d labels, want %d", when, id, got[id], w)
					}
				}
			}
			check("first")
			for k := 0; k < 3; k++ {
				f.restart(cfg)
				check(fmt.Sprintf("after restart %d", k+1))
				// An import of labels on another item, through the API.
				body := fmt.Sprintf("item,annotator,label\nt005,late%d,other\n", k)
				if r := f.do("POST", "/api/v1/labels/import", "boss", body, "Content-Type", "text/csv"); r.status != http.StatusOK {
					t.Fatalf("import: %d %s", r.status, r.body)
				}
				want["t005"] = redundancy + k + 1 // imports are not capped; the service adds none
				check(fmt.Sprintf("after import %d", k+1))
				if err := f.sv.pool.rebuild(); err != nil { // a round with no new batch
					t.Fatal(err)
				}
				check(fmt.Sprintf("after round %d", k+1))
			}
			// A new next batch picking t000 again wants one more label, once.
			if err := f.st.PutSelection(2, []byte(`[{"item":"t000","reason":"crowd-split"}]`), "test"); err != nil {
				t.Fatal(err)
			}
			if err := f.sv.pool.rebuild(); err != nil {
				t.Fatal(err)
			}
			want["t000"]++
			check("after the new batch")
			f.restart(cfg)
			check("after the new batch and a restart")
		})
	}
}

// TestNoLockOutBehindOneAddress sends bad tokens from one address (as a
// proxy would forward everyone's) faster than the failure limit, while
// valid clients behind the same address sign in and work: every valid
// request must succeed. The service used to check the address block before
// the token and refused 40 of 44 valid requests this way.
func TestNoLockOutBehindOneAddress(t *testing.T) {
	// TokenCache of a nanosecond: every valid request verifies its token
	// again, as the first request of each client after a restart does.
	f := newFixture(t, Config{Practice: -1, Check: -1, TokenCache: time.Nanosecond}, 50, nil, 4)
	stop := make(chan struct{})
	var wg sync.WaitGroup
	var bad, blocked int
	wg.Add(1)
	go func() {
		defer wg.Done()
		for i := 0; ; i++ {
			select {
			case <-stop:
				return
			default:
			}
			// Unknown token ids, and wrong secrets for ann4's token.
			tok := fmt.Sprintf("%016x.wrong-secret-%d", i, i)
			if i%2 == 1 {
				tok = strings.SplitN(f.tokens["ann4"], ".", 2)[0] + ".wrong-secret"
			}
			r := f.do("GET", "/api/v1/me", tok, nil)
			if r.status == http.StatusOK {
				t.Errorf("a bad token was accepted")
			}
			bad++
			if r.status == http.StatusTooManyRequests {
				blocked++
			}
			time.Sleep(20 * time.Millisecond) // 50 bad tokens a second
		}
	}()
	time.Sleep(300 * time.Millisecond) // the address has used up its failures
	ok, sent := 0, 0
	for i := 0; i < 44; i++ {
		a := fmt.Sprintf("ann%d", 1+i%3)
		sent++
		if r := f.do("GET", "/api/v1/me", a, nil); r.status == http.StatusOK {
			ok++
		} else {
			t.Logf("valid request %d refused: %d %s", i, r.status, r.body)
		}
		time.Sleep(10 * time.Millisecond)
	}
	// The page's sign-in works too.
	jar, _ := cookiejar.New(nil)
	cl := &http.Client{Jar: jar}
	req, _ := http.NewRequest("POST", f.ts.URL+"/api/v1/session", strings.NewReader(`{"token":"`+f.tokens["ann2"]+`"}`))
	req.Header.Set("Content-Type", "application/json")
	resp, err := cl.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	close(stop)
	wg.Wait()
	if ok != sent {
		t.Errorf("%d of %d valid requests succeeded while %d bad tokens came from the same address", ok, sent, bad)
	}
	if resp.StatusCode != http.StatusOK {
		t.Errorf("sign-in on the page: %d", resp.StatusCode)
	}
	if blocked == 0 {
		t.Errorf("none of %d bad tokens was slowed down", bad)
	}
	// The token id that gets wrong secrets is slowed down, whoever sends
	// it; the right secret gets through once a second.
	for i := 0; i < 10; i++ {
		f.do("GET", "/api/v1/me", strings.SplitN(f.tokens["ann4"], ".", 2)[0]+".wrong-secret", nil)
	}
	r := f.do("GET", "/api/v1/me", "ann4", nil)
	if r.status != http.StatusTooManyRequests || r.header.Get("Retry-After") == "" {
		t.Errorf("ann4 right after the wrong secrets: %d %s", r.status, r.body)
	}
	f.clock.Add(2 * time.Second)
	if r := f.do("GET", "/api/v1/me", "ann4", nil); r.status != http.StatusOK {
		t.Errorf("ann4 two seconds later: %d %s", r.status, r.body)
	}
	t.Logf("%d bad tokens (%d answered 429), %d valid requests", bad, blocked, sent)
}

// TestRevokeWhileServing revokes tokens through the API while the server
// runs: the token is refused from the next request on (the server had
// verified and cached it), sessions opened with it end, and the person's
// other tokens are revoked all at once.
func TestRevokeWhileServing(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 3, nil, 2)
	if r := f.do("GET", "/api/v1/me", "ann1", nil); r.status != http.StatusOK {
		t.Fatalf("before: %d", r.status)
	}
	// A page session opened with ann1's token.
	jar, _ := cookiejar.New(nil)
	cl := &http.Client{Jar: jar}
	req, _ := http.NewRequest("POST", f.ts.URL+"/api/v1/session", strings.NewReader(`{"token":"`+f.tokens["ann1"]+`"}`))
	req.Header.Set("Content-Type", "application/json")
	if resp, err := cl.Do(req); err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("sign-in: %v %v", resp, err)
	}
	me := func() int {
		resp, err := cl.Get(f.ts.URL + "/api/v1/me")
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if s := me(); s != http.StatusOK {
		t.Fatalf("session before: %d", s)
	}
	r := f.do("GET", "/api/v1/people", "boss", nil)
	var pl struct{ People []PersonView }
	json.Unmarshal(r.body, &pl)
	var tid string
	for _, p := range pl.People {
		if p.ID == "ann1" && len(p.Tokens) == 1 {
			tid = p.Tokens[0].ID
		}
	}
	if tid == "" || !strings.HasPrefix(f.tokens["ann1"], tid+".") || strings.Contains(string(r.body), f.tokens["ann1"]) {
		t.Fatalf("people list: %s", r.body)
	}
	if r := f.do("DELETE", "/api/v1/tokens/"+tid, "ann2", nil); r.status != http.StatusForbidden {
		t.Errorf("an annotator revoked a token: %d", r.status)
	}
	if r := f.do("DELETE", "/api/v1/tokens/"+tid, "boss", nil); r.status != http.StatusOK {
		t.Fatalf("revoke: %d %s", r.status, r.body)
	}
	if r := f.do("GET", "/api/v1/me", "ann1", nil); r.status != http.StatusUnauthorized {
		t.Errorf("the revoked token still works: %d %s", r.status, r.body)
	}
	if s := me(); s != http.StatusUnauthorized {
		t.Errorf("the session of the revoked token still works: %d", s)
	}
	if r := f.do("DELETE", "/api/v1/tokens/"+tid, "boss", nil); r.status != http.StatusNotFound {
		t.Errorf("revoking it again: %d %s", r.status, r.body)
	}
	// A new token for ann1; then every token of ann2 and ann1 at once.
	r = f.do("POST", "/api/v1/people/ann1/tokens", "boss", nil)
	if r.status != http.StatusCreated {
		t.Fatalf("new token: %d %s", r.status, r.body)
	}
	f.tokens["ann1"] = r.json(t)["token"].(string)
	if r := f.do("GET", "/api/v1/me", "ann1", nil); r.status != http.StatusOK {
		t.Errorf("the new token: %d", r.status)
	}
	for _, p := range []string{"ann1", "ann2"} {
		if r := f.do("DELETE", "/api/v1/people/"+p+"/tokens", "boss", nil); r.status != http.StatusOK || r.json(t)["revoked"] != 1.0 {
			t.Errorf("revoke %s: %d %s", p, r.status, r.body)
		}
		if r := f.do("GET", "/api/v1/me", p, nil); r.status != http.StatusUnauthorized {
			t.Errorf("%s after revoking all their tokens: %d", p, r.status)
		}
	}
	if r := f.do("DELETE", "/api/v1/people/nobody/tokens", "boss", nil); r.status != http.StatusNotFound {
		t.Errorf("revoking an unknown person: %d", r.status)
	}
	// Revoking in the store directly (as `loop people revoke` run beside
	// the server does) takes effect at once too.
	if _, err := RevokeToken(f.st, f.tokens["boss"], "test"); err != nil {
		t.Fatal(err)
	}
	if r := f.do("GET", "/api/v1/status", "boss", nil); r.status != http.StatusUnauthorized {
		t.Errorf("boss after a revocation in the store: %d", r.status)
	}
}

// TestSecureCookies: the session cookie is Secure behind a TLS proxy when
// the setting says so, and not otherwise over plain HTTP.
func TestSecureCookies(t *testing.T) {
	for _, secure := range []bool{false, true} {
		f := newFixture(t, Config{Practice: -1, Check: -1, SecureCookies: secure}, 1, nil, 1)
		r := f.do("POST", "/api/v1/session", "", SessionRequest{Token: f.tokens["ann1"]})
		if r.status != http.StatusOK {
			t.Fatalf("sign-in: %d %s", r.status, r.body)
		}
		ck := r.header.Get("Set-Cookie")
		if strings.Contains(ck, "Secure") != secure {
			t.Errorf("SecureCookies %v: cookie %q", secure, ck)
		}
	}
}

// TestChangeLastAnswer changes a person's latest answer, and only that.
func TestChangeLastAnswer(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, ChangeWindow: 5 * time.Minute}, 4, nil, 2)
	l1, i1 := f.next("ann1")
	f.label("ann1", l1, i1, "roads", "k1")
	l2, i2 := f.next("ann1")
	f.label("ann1", l2, i2, "roads", "k2")
	put := func(person, item, label string) reply {
		return f.do("PUT", "/api/v1/me/labels/last", person, ChangeRequest{Item: item, Label: label})
	}
	if r := put("ann1", i1, "rivers"); r.status != http.StatusConflict || r.json(t)["code"] != "not_latest" {
		t.Errorf("changing the answer before the latest: %d %s", r.status, r.body)
	}
	if r := put("ann2", i2, "rivers"); r.status != http.StatusConflict {
		t.Errorf("changing someone else's answer: %d %s", r.status, r.body)
	}
	if r := put("ann1", i2, "lakes"); r.status != http.StatusUnprocessableEntity {
		t.Errorf("changing to a class not in the codebook: %d %s", r.status, r.body)
	}
	r := put("ann1", i2, "rivers")
	if r.status != http.StatusOK || !strings.Contains(string(r.body), `"label":"rivers"`) {
		t.Fatalf("change: %d %s", r.status, r.body)
	}
	got, _ := f.st.LabelsFor(i2)
	if len(got) != 1 || got[0].Class != "rivers" {
		t.Errorf("stored: %+v", got)
	}
	// The pool still counts one label on the item.
	if n := perItem(t, f); n[i2] != 1 || len(mustLabels(t, f)) != 2 {
		t.Errorf("labels after the change: %v", n)
	}
	f.clock.Add(6 * time.Minute)
	if r := put("ann1", i2, "other"); r.status != http.StatusConflict || r.json(t)["code"] != "too_late" {
		t.Errorf("changing after the window: %d %s", r.status, r.body)
	}
}
