package api

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"handoff"
	"handoff/store"
)

var testCodebook = handoff.Codebook{
	Name: "topic", Question: "What is the text about?",
	Classes:      []handoff.Class{{Key: "rivers", Name: "Rivers"}, {Key: "roads", Name: "Roads"}, {Key: "other", Name: "Something else"}},
	Instructions: "Pick the main topic.",
}

// clock is a settable time for tests.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *clock) Add(d time.Duration) {
	c.mu.Lock()
	c.t = c.t.Add(d)
	c.mu.Unlock()
}

type fixture struct {
	t      *testing.T
	st     *store.Store
	sv     *Server
	ts     *httptest.Server
	clock  *clock
	tokens map[string]string // person → token
}

// newFixture makes a project with n text items (t000, t001, …), the given
// gold answers, an admin "boss" and annotators ann1..annK, and serves it.
func newFixture(t *testing.T, cfg Config, n int, gold []handoff.Gold, annotators int) *fixture {
	t.Helper()
	return newFixtureWith(t, testCodebook, cfg, n, gold, annotators)
}

// newFixtureWith is newFixture with another codebook.
func newFixtureWith(t *testing.T, cb handoff.Codebook, cfg Config, n int, gold []handoff.Gold, annotators int) *fixture {
	t.Helper()
	st, err := store.Create(t.TempDir(), cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	items := make([]handoff.Item, n)
	for i := range items {
		items[i] = handoff.Item{ID: fmt.Sprintf("t%03d", i), Kind: handoff.KindText, Text: fmt.Sprintf("text number %d", i)}
	}
	if n > 0 {
		if _, err := st.PutItems(items, false, "test"); err != nil {
			t.Fatal(err)
		}
	}
	if len(gold) > 0 {
		if _, err := st.PutGold(gold, "test"); err != nil {
			t.Fatal(err)
		}
	}
	f := &fixture{t: t, st: st, clock: &clock{t: time.Date(2026, 3, 1, 9, 0, 0, 0, time.UTC)}, tokens: map[string]string{}}
	st.Now = f.clock.Now
	cfg.Now = f.clock.Now
	cfg.Logf = t.Logf
	f.addPerson("boss", true)
	for i := 1; i <= annotators; i++ {
		f.addPerson(fmt.Sprintf("ann%d", i), false)
	}
	sv, err := New(st, cfg)
	if err != nil {
		t.Fatal(err)
	}
	f.sv = sv
	f.ts = httptest.NewServer(sv.Handler())
	t.Cleanup(func() { f.ts.Close(); sv.Close() })
	return f
}

func newTestServer(sv *Server) *httptest.Server { return httptest.NewServer(sv.Handler()) }

func (f *fixture) addPerson(id string, admin bool) {
	f.t.Helper()
	tok, err := AddPerson(f.st, id, admin, "test")
	if err != nil {
		f.t.Fatal(err)
	}
	f.tokens[id] = tok
}

type reply struct {
	status int
	body   []byte
	header http.Header
}

func (r reply) json(t *testing.T) map[string]any {
	t.Helper()
	var m map[string]any
	if err := json.Unmarshal(r.body, &m); err != nil {
		t.Fatalf("reply %d is not a JSON object: %v: %s", r.status, err, r.body)
	}
	return m
}

// do sends a request as person (bearer token; "" for none). body may be a
// string (sent as is) or a value (sent as JSON).
func (f *fixture) do(method, path, person string, body any, hdr ...string) reply {
	f.t.Helper()
	var rd io.Reader
	switch b := body.(type) {
	case nil:
	case string:
		rd = strings.NewReader(b)
	case []byte:
		rd = bytes.NewReader(b)
	default:
		j, err := json.Marshal(b)
		if err != nil {
			f.t.Fatal(err)
		}
		rd = bytes.NewReader(j)
	}
	req, err := http.NewRequest(method, f.ts.URL+path, rd)
	if err != nil {
		f.t.Fatal(err)
	}
	if person != "" {
		tok, ok := f.tokens[person]
		if !ok {
			tok = person // a raw token
		}
		req.Header.Set("Authorization", "Bearer "+tok)
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	for i := 0; i+1 < len(hdr); i += 2 {
		req.Header.Set(hdr[i], hdr[i+1])
	}
	resp, err := f.ts.Client().Do(req)
	if err != nil {
		f.t.Fatal(err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		f.t.Fatal(err)
	}
	return reply{status: resp.StatusCode, body: b, header: resp.Header}
}

// next fetches the next item for person and returns the lease id and item
// id ("" when nothing is left).
func (f *fixture) next(person string) (lease, item string) {
	f.t.Helper()
	r := f.do("GET", "/api/v1/next", person, nil)
	if r.status != http.StatusOK {
		f.t.Fatalf("next for %s: %d %s", person, r.status, r.body)
	}
	var nr NextReply
	if err := json.Unmarshal(r.body, &nr); err != nil {
		f.t.Fatal(err)
	}
	if nr.Lease == nil {
		return "", ""
	}
	return nr.Lease.ID, nr.Item.ID
}

func (f *fixture) label(person, lease, item, class, key string) reply {
	f.t.Helper()
	return f.do("POST", "/api/v1/labels", person, LabelRequest{Lease: lease, Item: item, Label: class, Seconds: 2}, "Idempotency-Key", key)
}

// snapshot is everything a refused request must leave unchanged.
func (f *fixture) snapshot() string {
	f.t.Helper()
	f.sv.bg.Wait() // stored copies of leases are written in the background
	st, err := f.st.Stats()
	if err != nil {
		f.t.Fatal(err)
	}
	keys, err := f.st.IdempotencyKeys()
	if err != nil {
		f.t.Fatal(err)
	}
	leases, err := f.st.ServiceLeases()
	if err != nil {
		f.t.Fatal(err)
	}
	unsure, err := f.st.UnsureCounts()
	if err != nil {
		f.t.Fatal(err)
	}
	labels, err := f.st.Labels()
	if err != nil {
		f.t.Fatal(err)
	}
	b, _ := json.Marshal([]any{st, keys, leases, unsure, labels, f.sv.pool.status()})
	return string(b)
}
