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

	"handoff"
)

func TestLabelFlowAndRetry(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 5, nil, 2)
	lease, item := f.next("ann1")
	if item != "t000" {
		t.Fatalf("first item %q, want t000 (order of arrival)", item)
	}
	// Asking again while the lease is live gives the same lease.
	if l2, i2 := f.next("ann1"); l2 != lease || i2 != item {
		t.Errorf("second next = %s %s, want the live lease %s %s", l2, i2, lease, item)
	}
	r := f.label("ann1", lease, item, "roads", "k-1")
	if r.status != http.StatusCreated {
		t.Fatalf("label: %d %s", r.status, r.body)
	}
	var lr LabelReply
	json.Unmarshal(r.body, &lr)
	if lr.Duplicate || lr.Label.Class != "roads" || lr.Label.Annotator != "ann1" || lr.Progress.Labelled != 1 {
		t.Errorf("reply %+v", lr)
	}
	// A retry with the same key returns the first answer and writes nothing.
	before := f.snapshot()
	r = f.label("ann1", lease, item, "roads", "k-1")
	if r.status != http.StatusOK {
		t.Fatalf("retry: %d %s", r.status, r.body)
	}
	var dup LabelReply
	json.Unmarshal(r.body, &dup)
	if !dup.Duplicate || dup.Number != lr.Number || !dup.Label.Time.Equal(lr.Label.Time) {
		t.Errorf("retry reply %+v, want duplicate of %+v", dup, lr)
	}
	if after := f.snapshot(); after != before {
		t.Errorf("retry changed the store:\n%s\n%s", before, after)
	}
	// The same key for a different answer is refused.
	if r := f.label("ann1", lease, item, "rivers", "k-1"); r.status != http.StatusUnprocessableEntity {
		t.Errorf("key reuse: %d %s", r.status, r.body)
	}
	labels, err := f.st.LabelsFor(item)
	if err != nil || len(labels) != 1 {
		t.Fatalf("labels of %s: %v %v", item, labels, err)
	}
	// Own labels only.
	l2, i2 := f.next("ann2")
	if r := f.label("ann2", l2, i2, "other", "x"); r.status != http.StatusCreated {
		t.Fatalf("ann2 label: %d %s", r.status, r.body)
	}
	r = f.do("GET", "/api/v1/me/labels", "ann1", nil)
	var mine struct{ Labels []handoff.Label }
	json.Unmarshal(r.body, &mine)
	if len(mine.Labels) != 1 || mine.Labels[0].Annotator != "ann1" {
		t.Errorf("ann1's labels: %s", r.body)
	}
	// The next item for ann1 is a new one, never the one labelled.
	if _, i := f.next("ann1"); i == item || i == "" {
		t.Errorf("ann1 got %q after labelling %q", i, item)
	}
	// A label may ask for the next item in its reply.
	l3, i3 := f.next("ann1")
	r = f.do("POST", "/api/v1/labels", "ann1", LabelRequest{Lease: l3, Item: i3, Label: "other", Next: true}, "Idempotency-Key", "k-3")
	var withNext LabelReply
	json.Unmarshal(r.body, &withNext)
	if r.status != http.StatusCreated || withNext.Next == nil || withNext.Next.Item == nil || withNext.Next.Item.ID == i3 {
		t.Fatalf("label with next: %d %s", r.status, r.body)
	}
	if l4, i4 := f.next("ann1"); l4 != withNext.Next.Lease.ID || i4 != withNext.Next.Item.ID {
		t.Errorf("GET next after a label with next gives %s %s, want the same lease %+v", l4, i4, withNext.Next.Lease)
	}
	r = f.do("GET", "/api/v1/me", "ann1", nil)
	var me MeReply
	json.Unmarshal(r.body, &me)
	if me.Progress.Labelled != 2 || me.Progress.Today != 2 || me.Practice.State != "off" {
		t.Errorf("me: %s", r.body)
	}
}

// TestRedundancy checks that no item is handed out beyond its target
// counting labels and live leases, that nobody gets an item twice, and that
// expired leases return to the pool.
func TestRedundancy(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, Redundancy: 2, LeaseTime: time.Minute}, 3, nil, 6)
	got := map[string]string{}
	for _, a := range []string{"ann1", "ann2", "ann3", "ann4", "ann5", "ann6"} {
		_, item := f.next(a)
		got[a] = item
	}
	want := map[string]string{"ann1": "t000", "ann2": "t000", "ann3": "t001", "ann4": "t001", "ann5": "t002", "ann6": "t002"}
	for a, it := range want {
		if got[a] != it {
			t.Errorf("%s got %q, want %q (all: %v)", a, got[a], it, got)
		}
	}
	// Everything is taken: a seventh person gets nothing.
	f.addPersonLive("ann7")
	if l, it := f.next("ann7"); l != "" {
		t.Errorf("ann7 got %s while all items are at their target", it)
	}
	// After the leases expire the items return to the pool.
	f.clock.Add(61 * time.Second)
	f.sv.pool.expire(f.clock.Now())
	if _, it := f.next("ann7"); it != "t000" {
		t.Errorf("after expiry ann7 got %q, want t000", it)
	}
	// A late answer under an expired lease is refused with 410 and stores
	// nothing.
	before := len(mustLabels(t, f))
	r := f.label("ann1", "nonexistent", "t000", "roads", "late")
	if r.status != http.StatusConflict {
		t.Errorf("unknown lease: %d %s", r.status, r.body)
	}
	if n := len(mustLabels(t, f)); n != before {
		t.Errorf("labels %d → %d", before, n)
	}
}

func (f *fixture) addPersonLive(id string) { f.addPerson(id, false) }

func mustLabels(t *testing.T, f *fixture) []handoff.Label {
	t.Helper()
	l, err := f.st.Labels()
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// TestConcurrentAnnotators runs many annotators at once until the pool is
// empty: every item ends with exactly Redundancy labels from different
// people, and every acknowledged label is stored once.
func TestConcurrentAnnotators(t *testing.T) {
	const items, people, redundancy = 40, 12, 3
	f := newFixture(t, Config{Practice: -1, Check: -1, Redundancy: redundancy}, items, nil, people)
	var wg sync.WaitGroup
	var mu sync.Mutex
	acked := 0
	for p := 1; p <= people; p++ {
		wg.Add(1)
		go func(a string) {
			defer wg.Done()
			for k := 0; ; k++ {
				lease, item := f.next(a)
				if lease == "" {
					return
				}
				r := f.label(a, lease, item, testCodebook.Classes[k%3].Key, fmt.Sprintf("%s-%d", a, k))
				if r.status != http.StatusCreated {
					t.Errorf("%s: %d %s", a, r.status, r.body)
					return
				}
				mu.Lock()
				acked++
				mu.Unlock()
			}
		}(fmt.Sprintf("ann%d", p))
	}
	wg.Wait()
	labels := mustLabels(t, f)
	if len(labels) != acked || acked != items*redundancy {
		t.Fatalf("%d labels stored, %d acknowledged, want %d", len(labels), acked, items*redundancy)
	}
	seen := map[string]bool{}
	perItem := map[string]int{}
	for _, l := range labels {
		k := l.Item + "/" + l.Annotator
		if seen[k] {
			t.Errorf("%s labelled %s twice", l.Annotator, l.Item)
		}
		seen[k] = true
		perItem[l.Item]++
	}
	for it, n := range perItem {
		if n != redundancy {
			t.Errorf("%s has %d labels", it, n)
		}
	}
	if st := f.sv.pool.status(); st.OpenItems != 0 || st.LiveLeases != 0 {
		t.Errorf("pool after the run: %+v", st)
	}
}

func TestRestartKeepsLeases(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, Redundancy: 1}, 3, nil, 2)
	lease, item := f.next("ann1")
	// A second server on the same store (as after a restart) knows the
	// lease: ann2 does not get the item, and ann1's answer is accepted.
	f.ts.Close()
	f.sv.Close()
	sv, err := New(f.st, Config{Practice: -1, Check: -1, Redundancy: 1, Now: f.clock.Now})
	if err != nil {
		t.Fatal(err)
	}
	defer sv.Close()
	g, err := sv.pool.next("ann2", f.clock.Now())
	if err != nil || g.itemID == item {
		t.Fatalf("after restart ann2 got %q (%v); ann1 holds %q", g.itemID, err, item)
	}
	g, err = sv.pool.next("ann1", f.clock.Now())
	if err != nil || !g.renewed || g.lease.id != lease {
		t.Fatalf("after restart ann1's lease %+v, want %s", g, lease)
	}
}

func TestSkipAndUnsure(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, Redundancy: 1}, 3, nil, 2)
	lease, item := f.next("ann1")
	r := f.do("POST", "/api/v1/leases/"+lease+"/skip", "ann1", SkipRequest{Reason: "unsure"})
	if r.status != http.StatusOK {
		t.Fatalf("skip: %d %s", r.status, r.body)
	}
	// The skipped item goes to someone else, not back to ann1.
	if _, it := f.next("ann1"); it == item {
		t.Errorf("ann1 got the skipped item %s again", item)
	}
	if _, it := f.next("ann2"); it != item {
		t.Errorf("ann2 got %q, want the skipped %q", it, item)
	}
	r = f.do("GET", "/api/v1/unsure", "boss", nil)
	if !strings.Contains(string(r.body), `"item":"`+item+`","people":1`) {
		t.Errorf("unsure list: %s", r.body)
	}
	// Someone else's lease cannot be skipped.
	l2, _ := f.next("ann2")
	if r := f.do("POST", "/api/v1/leases/"+l2+"/skip", "ann1", SkipRequest{Reason: "skip"}); r.status != http.StatusNotFound {
		t.Errorf("skipping another's lease: %d %s", r.status, r.body)
	}
}

// TestPractice walks through the practice (answers shown) and the check
// (answers never shown): real work opens only after a passed check; the
// check cannot be passed by trial: each attempt draws other items, a failed
// attempt's score is not shown, and attempts run out until the team grants
// another.
func TestPractice(t *testing.T) {
	var gold []handoff.Gold
	answers := map[string]string{}
	for i := 0; i < 10; i++ {
		g := handoff.Gold{Item: fmt.Sprintf("t%03d", i), Class: testCodebook.Classes[i%3].Key}
		gold = append(gold, g)
		answers[g.Item] = g.Class
	}
	wrong := func(item string) string {
		for _, c := range testCodebook.Classes {
			if c.Key != answers[item] {
				return c.Key
			}
		}
		return ""
	}
	f := newFixture(t, Config{Practice: 2, Check: 3, PassMark: 1, CheckAttempts: 2}, 14, gold, 1)
	if r := f.do("GET", "/api/v1/next", "ann1", nil); r.status != http.StatusForbidden || r.json(t)["code"] != "practice_required" {
		t.Fatalf("next before the practice: %d %s", r.status, r.body)
	}
	view := func() PracticeView {
		t.Helper()
		r := f.do("GET", "/api/v1/practice", "ann1", nil)
		if r.status != http.StatusOK {
			t.Fatalf("practice: %d %s", r.status, r.body)
		}
		var v PracticeView
		json.Unmarshal(r.body, &v)
		return v
	}
	answer := func(item, label string) (PracticeFeedback, string) {
		t.Helper()
		r := f.do("POST", "/api/v1/practice/answers", "ann1", PracticeAnswer{Item: item, Label: label})
		if r.status != http.StatusOK {
			t.Fatalf("answer %s: %d %s", item, r.status, r.body)
		}
		var fb PracticeFeedback
		json.Unmarshal(r.body, &fb)
		return fb, string(r.body)
	}
	practise := func() {
		t.Helper()
		v := view()
		if v.State != "practice" || v.Item.ID != "t000" || v.PracticeItems != 2 {
			t.Fatalf("practice start: %+v", v)
		}
		fb, _ := answer("t000", wrong("t000"))
		if fb.Correct == nil || *fb.Correct || fb.Expected == nil || fb.Expected.Key != answers["t000"] {
			t.Errorf("practice feedback %+v", fb)
		}
		fb, _ = answer("t001", answers["t001"])
		if fb.Correct == nil || !*fb.Correct || fb.Next.State != "check" || fb.Next.CheckItems != 3 {
			t.Fatalf("after the practice: %+v", fb.Next)
		}
	}
	// attempt answers the check (right or wrong throughout) and returns the
	// items shown, in order.
	attempt := func(right bool) ([]string, PracticeView) {
		t.Helper()
		var shown []string
		v := view()
		for v.State == "check" {
			item := v.Item.ID
			if item < "t002" {
				t.Fatalf("a practice item %s came up in the check", item)
			}
			shown = append(shown, item)
			label := answers[item]
			if !right {
				label = wrong(item)
			}
			fb, body := answer(item, label)
			if fb.Correct != nil || fb.Expected != nil {
				t.Errorf("the check gave feedback: %s", body)
			}
			if strings.Contains(body, "right") || strings.Contains(body, "correct") {
				t.Errorf("the check's reply tells the score: %s", body)
			}
			v = fb.Next
		}
		return shown, v
	}

	practise()
	first, v := attempt(false)
	if len(first) != 3 || v.State != "failed" || v.Attempts != 1 || v.AttemptsLeft != 1 || v.CheckNeeded != 3 {
		t.Fatalf("after a failed attempt: %v %+v", first, v)
	}
	if r := f.do("GET", "/api/v1/practice", "ann1", nil); strings.Contains(string(r.body), "right") {
		t.Errorf("the failed state shows the score: %s", r.body)
	}
	if r := f.do("GET", "/api/v1/next", "ann1", nil); r.status != http.StatusForbidden {
		t.Errorf("next after a failed check: %d", r.status)
	}
	if r := f.do("POST", "/api/v1/practice/answers", "ann1", PracticeAnswer{Item: first[0], Label: answers[first[0]]}); r.status != http.StatusConflict {
		t.Errorf("an answer after the attempt ended: %d %s", r.status, r.body)
	}
	if r := f.do("POST", "/api/v1/practice/retry", "ann1", nil); r.status != http.StatusOK {
		t.Fatalf("retry: %d %s", r.status, r.body)
	}
	practise()
	second, v := attempt(false)
	for _, a := range first {
		for _, b := range second {
			if a == b {
				t.Errorf("the second attempt showed %s again (first %v, second %v) though the pool has 8 items", a, first, second)
			}
		}
	}
	if v.State != "locked" || v.AttemptsLeft != 0 {
		t.Fatalf("after the last attempt: %+v", v)
	}
	if r := f.do("POST", "/api/v1/practice/retry", "ann1", nil); r.status != http.StatusConflict || !strings.Contains(string(r.body), "team") {
		t.Errorf("retry with no attempts left: %d %s", r.status, r.body)
	}
	// The team sees the score and grants another attempt.
	r := f.do("GET", "/api/v1/people", "boss", nil)
	if !strings.Contains(string(r.body), `"state":"locked","attempts":2,"of":3`) {
		t.Errorf("people list: %s", r.body)
	}
	if r := f.do("POST", "/api/v1/people/ann1/check", "ann1", nil); r.status != http.StatusForbidden {
		t.Errorf("an annotator granted themself an attempt: %d", r.status)
	}
	if r := f.do("POST", "/api/v1/people/ann1/check", "boss", nil); r.status != http.StatusOK || !strings.Contains(string(r.body), `"state":"failed"`) {
		t.Fatalf("grant: %d %s", r.status, r.body)
	}
	if r := f.do("POST", "/api/v1/practice/retry", "ann1", nil); r.status != http.StatusOK {
		t.Fatalf("retry after the grant: %d %s", r.status, r.body)
	}
	practise()
	if _, v := attempt(true); v.State != "passed" {
		t.Fatalf("after a perfect check: %+v", v)
	}
	// Real work now, and never a gold item.
	for {
		lease, item := f.next("ann1")
		if lease == "" {
			break
		}
		if item <= "t009" {
			t.Errorf("gold item %s handed out as work", item)
		}
		if r := f.label("ann1", lease, item, "other", item); r.status != http.StatusCreated {
			t.Fatalf("label %s: %d", item, r.status)
		}
	}
	if n := len(mustLabels(t, f)); n != 4 {
		t.Errorf("%d labels, want 4 (items t010–t013; practice answers are not labels)", n)
	}
}

// TestCheckDraws checks that attempts show their items in different orders
// when the pool holds just as many items as the check asks for.
func TestCheckDraws(t *testing.T) {
	ts := practiceSet{check: 5}
	for i := 0; i < 5; i++ {
		ts.pool = append(ts.pool, handoff.Gold{Item: fmt.Sprint(i)})
	}
	orders := map[string]bool{}
	for i := 0; i < 50; i++ {
		d := ts.draw(nil)
		if len(d) != 5 {
			t.Fatalf("draw %v", d)
		}
		orders[strings.Join(d, ",")] = true
	}
	// 50 draws of 5! = 120 orders: fewer than 10 distinct would happen by
	// chance with probability far below 1e-9.
	if len(orders) < 10 {
		t.Errorf("50 attempts showed only %d orders", len(orders))
	}
}

// TestOldPersonRecord reads a person's record written under the old names
// of the practice gate.
func TestOldPersonRecord(t *testing.T) {
	var p Person
	old := `{"id":"ann","admin":false,"created":"2026-01-02T03:04:05Z","training":{"step":3,"quiz_answered":2,"quiz_correct":2,"passed":true,"attempts":1}}`
	if err := json.Unmarshal([]byte(old), &p); err != nil {
		t.Fatal(err)
	}
	if p.ID != "ann" || !p.Practice.Passed || p.Practice.Done != 3 || p.Practice.Attempts != 1 {
		t.Errorf("old record read as %+v", p)
	}
	b, _ := json.Marshal(p)
	if strings.Contains(string(b), "training") || strings.Contains(string(b), "quiz") {
		t.Errorf("written back with the old names: %s", b)
	}
}

func TestSessionAndCSRF(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 3, nil, 1)
	jar, _ := cookiejar.New(nil)
	cl := &http.Client{Jar: jar}
	post := func(path, body string, hdr ...string) *http.Response {
		req, _ := http.NewRequest("POST", f.ts.URL+path, strings.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		for i := 0; i+1 < len(hdr); i += 2 {
			req.Header.Set(hdr[i], hdr[i+1])
		}
		resp, err := cl.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		return resp
	}
	get := func(path string, hdr ...string) *http.Response {
		req, _ := http.NewRequest("GET", f.ts.URL+path, nil)
		for i := 0; i+1 < len(hdr); i += 2 {
			req.Header.Set(hdr[i], hdr[i+1])
		}
		resp, err := cl.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		return resp
	}
	if r := post("/api/v1/session", `{"token":"0123456789abcdef.nope"}`); r.StatusCode != http.StatusUnauthorized {
		t.Errorf("bad token sign-in: %d", r.StatusCode)
	}
	if r := post("/api/v1/session", `{"token":"`+f.tokens["ann1"]+`"}`, "Origin", "http://evil.example"); r.StatusCode != http.StatusForbidden {
		t.Errorf("cross-site sign-in: %d", r.StatusCode)
	}
	r := post("/api/v1/session", `{"token":"`+f.tokens["ann1"]+`"}`)
	if r.StatusCode != http.StatusOK {
		t.Fatalf("sign-in: %d", r.StatusCode)
	}
	var sr SessionReply
	json.NewDecoder(r.Body).Decode(&sr)
	r.Body.Close()
	ck := r.Cookies()
	if len(ck) != 1 || !ck[0].HttpOnly || ck[0].SameSite != http.SameSiteStrictMode {
		t.Errorf("session cookie %+v", ck)
	}
	if r := get("/api/v1/next"); r.StatusCode != http.StatusForbidden {
		t.Errorf("cookie request that changes something without CSRF header: %d", r.StatusCode)
	}
	if r := get("/api/v1/next", csrfHeader, "wrong"); r.StatusCode != http.StatusForbidden {
		t.Errorf("wrong CSRF header: %d", r.StatusCode)
	}
	if r := get("/api/v1/next", csrfHeader, sr.CSRF); r.StatusCode != http.StatusOK {
		t.Errorf("with CSRF header: %d", r.StatusCode)
	}
	if r := get("/api/v1/me"); r.StatusCode != http.StatusOK {
		t.Errorf("read-only route with the cookie: %d", r.StatusCode)
	}
	if r := get("/api/v1/status", csrfHeader, sr.CSRF); r.StatusCode != http.StatusForbidden {
		t.Errorf("annotator session on an admin route: %d", r.StatusCode)
	}
	req, _ := http.NewRequest("DELETE", f.ts.URL+"/api/v1/session", nil)
	req.Header.Set(csrfHeader, sr.CSRF)
	if resp, err := cl.Do(req); err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("sign out: %v %v", resp, err)
	}
	if r := get("/api/v1/me"); r.StatusCode != http.StatusUnauthorized {
		t.Errorf("after sign-out: %d", r.StatusCode)
	}
}

func TestRateLimit(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, Rate: 0.001, Burst: 3}, 3, nil, 1)
	for i := 0; i < 3; i++ {
		if r := f.do("GET", "/api/v1/me", "ann1", nil); r.status != http.StatusOK {
			t.Fatalf("request %d: %d", i, r.status)
		}
	}
	r := f.do("GET", "/api/v1/me", "ann1", nil)
	if r.status != http.StatusTooManyRequests || r.header.Get("Retry-After") == "" {
		t.Errorf("fourth request: %d %s", r.status, r.body)
	}
	// Limits are per person.
	if r := f.do("GET", "/api/v1/me", "boss", nil); r.status != http.StatusOK {
		t.Errorf("another person: %d", r.status)
	}
}

func TestAdminRoutes(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 0, nil, 1)
	r := f.do("POST", "/api/v1/items", "boss", "id,text\nd1,The river rose. The road closed.\nd2,A quiet day.\n",
		"Content-Type", "text/csv")
	if r.status != http.StatusOK || r.json(t)["added"] != 2.0 {
		t.Fatalf("items: %d %s", r.status, r.body)
	}
	r = f.do("POST", "/api/v1/items?split=sentences", "boss", `{"id":"d3","text":"One. Two."}`+"\n", "Content-Type", "application/jsonl")
	if r.status != http.StatusOK || r.json(t)["added"] != 2.0 {
		t.Fatalf("split items: %d %s", r.status, r.body)
	}
	// A bad row refuses the whole import and names the line.
	before := f.snapshot()
	r = f.do("POST", "/api/v1/labels/import", "boss", "item,annotator,label\nd1,x,rivers\nd2,y,lakes\n", "Content-Type", "text/csv")
	if r.status != http.StatusUnprocessableEntity || !strings.Contains(string(r.body), ":3") {
		t.Errorf("bad label import: %d %s", r.status, r.body)
	}
	if f.snapshot() != before {
		t.Error("a refused import changed the store")
	}
	r = f.do("POST", "/api/v1/labels/import", "boss", "item,annotator,label\nd1,x,rivers\nd2,y,roads\nd1,y,rivers\n", "Content-Type", "text/csv")
	if r.status != http.StatusOK {
		t.Fatalf("labels: %d %s", r.status, r.body)
	}
	// The pool counts imported labels.
	if st := f.sv.pool.status(); st.WorkItems != 4 {
		t.Errorf("pool %+v", st)
	}
	r = f.do("POST", "/api/v1/gold", "boss", "item,label\nd2,roads\n", "Content-Type", "text/csv")
	if r.status != http.StatusOK {
		t.Fatalf("gold: %d %s", r.status, r.body)
	}
	if st := f.sv.pool.status(); st.WorkItems != 3 {
		t.Errorf("gold item still handed out as work: %+v", st)
	}
	r = f.do("GET", "/api/v1/export/labels?format=csv", "boss", nil)
	if r.status != http.StatusOK || !strings.HasPrefix(string(r.body), "item,annotator,label,time,seconds\nd1,x,rivers,,\n") {
		t.Errorf("labels export: %d %q", r.status, r.body)
	}
	r = f.do("GET", "/api/v1/export?format=jsonl", "boss", nil)
	if r.status != http.StatusOK || strings.Count(string(r.body), "\n") != 4 || !strings.Contains(string(r.body), `"source":"gold"`) {
		t.Errorf("export: %d %s", r.status, r.body)
	}
	for _, p := range []string{"/api/v1/status", "/api/v1/labels-per-day", "/api/v1/people", "/api/v1/annotators",
		"/api/v1/agreement", "/api/v1/rounds", "/api/v1/next-batch", "/api/v1/unsure"} {
		if r := f.do("GET", p, "boss", nil); r.status != http.StatusOK {
			t.Errorf("GET %s: %d %s", p, r.status, r.body)
		}
	}
	r = f.do("POST", "/api/v1/people", "boss", PersonRequest{ID: "newcomer"})
	if r.status != http.StatusCreated {
		t.Fatalf("add person: %d %s", r.status, r.body)
	}
	f.tokens["newcomer"] = r.json(t)["token"].(string)
	if r := f.do("GET", "/api/v1/me", "newcomer", nil); r.status != http.StatusOK {
		t.Errorf("newcomer's token: %d %s", r.status, r.body)
	}
	if r := f.do("POST", "/api/v1/people", "boss", PersonRequest{ID: "newcomer"}); r.status != http.StatusConflict {
		t.Errorf("adding a person twice: %d", r.status)
	}
}

func TestMetrics(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 3, nil, 1)
	lease, item := f.next("ann1")
	f.label("ann1", lease, item, "roads", "m1")
	f.label("ann1", lease, item, "roads", "m1")
	// By default the metrics are for admins only.
	if r := f.do("GET", "/metrics", "", nil); r.status != http.StatusUnauthorized {
		t.Errorf("metrics without a token: %d", r.status)
	}
	if r := f.do("GET", "/metrics", "ann1", nil); r.status != http.StatusForbidden {
		t.Errorf("metrics with an annotator's token: %d", r.status)
	}
	r := f.do("GET", "/metrics", "boss", nil)
	for _, want := range []string{
		`handoff_labels_received_total{outcome="stored"} 1`,
		`handoff_labels_received_total{outcome="duplicate"} 1`,
		`handoff_leases_total{event="granted"} 1`,
		`handoff_leases_live 0`,
		`handoff_http_request_duration_seconds_count{code="201",method="POST",route="/api/v1/labels"} 1`,
		`handoff_round_duration_seconds`,
	} {
		if !strings.Contains(string(r.body), want) {
			t.Errorf("metrics lack %q", want)
		}
	}
	for _, c := range []struct {
		mode   string
		status int
	}{{"open", http.StatusOK}, {"off", http.StatusNotFound}} {
		g := newFixture(t, Config{Practice: -1, Check: -1, Metrics: c.mode}, 1, nil, 0)
		if r := g.do("GET", "/metrics", "", nil); r.status != c.status {
			t.Errorf("metrics %s, no token: %d, want %d", c.mode, r.status, c.status)
		}
	}
	if _, err := New(f.st, Config{Metrics: "everyone"}); err == nil {
		t.Error("Metrics \"everyone\" accepted")
	}
}
