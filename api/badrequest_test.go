package api

import (
	"encoding/json"
	"io"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"handoff"
)

// TestBadRequests sends one bad request of each kind and checks that it
// gets the right 4xx with a JSON error body and changes nothing in the
// store or the pool.
func TestBadRequests(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1, LeaseTime: time.Minute, MaxBody: 1024}, 4, nil, 2)
	// An image item whose file sits next to the project.
	img := filepath.Join(t.TempDir(), "cell.png")
	if err := os.WriteFile(img, pngBytes, 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := f.st.PutItems([]handoff.Item{{ID: "img1", Kind: handoff.KindImage, Path: img}}, false, "test"); err != nil {
		t.Fatal(err)
	}
	if err := f.sv.pool.rebuild(); err != nil {
		t.Fatal(err)
	}
	lease, item := f.next("ann1")
	// An expired lease: ann2 takes one and lets it run out.
	oldLease, oldItem := f.next("ann2")
	f.clock.Add(2 * time.Minute)
	f.sv.pool.expire(f.clock.Now())
	lease, item = f.next("ann1") // ann1's first lease expired too; take a fresh one
	good := func(mod func(*LabelRequest)) LabelRequest {
		r := LabelRequest{Lease: lease, Item: item, Label: "roads", Seconds: 1}
		if mod != nil {
			mod(&r)
		}
		return r
	}
	big := `{"lease":"` + strings.Repeat("x", 2000) + `"}`
	// A token that was revoked.
	f.addPerson("gone", false)
	if _, err := RevokeToken(f.st, f.tokens["gone"], "test"); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name     string
		method   string
		path     string
		person   string // "" no token; "bad" a wrong token
		body     any
		hdr      []string
		status   int
		contains string
	}{
		{"unknown item", "POST", "/api/v1/labels", "ann1", good(func(r *LabelRequest) { r.Item = "t999" }), []string{"Idempotency-Key", "a"}, 404, "unknown item"},
		{"class not in the codebook", "POST", "/api/v1/labels", "ann1", good(func(r *LabelRequest) { r.Label = "lakes" }), []string{"Idempotency-Key", "b"}, 422, "not a class"},
		{"malformed JSON", "POST", "/api/v1/labels", "ann1", `{"lease": "x", "item": `, []string{"Idempotency-Key", "c"}, 400, "malformed JSON"},
		{"unknown field", "POST", "/api/v1/labels", "ann1", `{"lease":"x","item":"t000","label":"roads","gold":"rivers"}`, []string{"Idempotency-Key", "c2"}, 400, "unknown field"},
		{"oversized body", "POST", "/api/v1/labels", "ann1", big, []string{"Idempotency-Key", "d"}, 413, "at most 1024"},
		{"oversized body without length", "POST", "/api/v1/labels", "ann1", chunked(big), []string{"Idempotency-Key", "d2"}, 413, "larger than 1024"},
		{"expired lease", "POST", "/api/v1/labels", "ann2", LabelRequest{Lease: oldLease, Item: oldItem, Label: "roads"}, []string{"Idempotency-Key", "e"}, 410, "expired"},
		{"another person's lease", "POST", "/api/v1/labels", "ann2", good(nil), []string{"Idempotency-Key", "e2"}, 409, "another item or person"},
		{"no idempotency key", "POST", "/api/v1/labels", "ann1", good(nil), nil, 400, "idempotency key"},
		{"missing token", "GET", "/api/v1/next", "", nil, nil, 401, "sign in"},
		{"wrong token", "GET", "/api/v1/next", "0123456789abcdef.wrong-secret", nil, nil, 401, "not valid"},
		{"malformed token", "POST", "/api/v1/labels", "garbage", good(nil), []string{"Idempotency-Key", "f"}, 401, "not valid"},
		{"annotator on an admin route", "POST", "/api/v1/labels/import", "ann1", "item,annotator,label\nt000,x,roads\n", []string{"Content-Type", "text/csv"}, 403, "admin"},
		{"annotator reads the agreement", "GET", "/api/v1/agreement", "ann1", nil, nil, 403, "admin"},
		{"annotator exports", "GET", "/api/v1/export", "ann1", nil, nil, 403, "admin"},
		{"annotator adds a person", "POST", "/api/v1/people", "ann1", PersonRequest{ID: "mallory", Admin: true}, nil, 403, "admin"},
		{"path in an image request", "GET", "/api/v1/items/..%2F..%2Fetc%2Fpasswd/image", "boss", nil, nil, 400, "by item id"},
		{"path as a parameter of an image request", "GET", "/api/v1/items/img1/image?path=/etc/passwd", "boss", nil, nil, 400, "no parameters"},
		{"image of an item not held", "GET", "/api/v1/items/img1/image", "ann1", nil, nil, 403, "hold"},
		{"image of an unknown item", "GET", "/api/v1/items/nothing/image", "boss", nil, nil, 404, "unknown item"},
		{"skip with a bad reason", "POST", "/api/v1/leases/" + lease + "/skip", "ann1", SkipRequest{Reason: "bored"}, nil, 422, "reason"},
		{"import in an unknown format", "POST", "/api/v1/items", "boss", "<items/>", []string{"Content-Type", "application/xml"}, 415, "CSV"},
		{"unknown route", "GET", "/api/v1/nothing-here", "boss", nil, nil, 404, "no such route"},
		// Issue 14.
		{"label sent as plain text", "POST", "/api/v1/labels", "ann1", good(nil), []string{"Idempotency-Key", "g", "Content-Type", "text/plain"}, 415, "Content-Type: application/json"},
		{"label sent without a content type", "POST", "/api/v1/labels", "ann1", good(nil), []string{"Idempotency-Key", "g2", "Content-Type", ""}, 415, "as JSON"},
		{"sign-in sent as a form", "POST", "/api/v1/session", "", "token=abc", []string{"Content-Type", "application/x-www-form-urlencoded"}, 415, "as JSON"},
		{"revoked token", "GET", "/api/v1/me", "gone", nil, nil, 401, "not valid"},
		{"change an answer never given", "PUT", "/api/v1/me/labels/last", "ann1", ChangeRequest{Item: item, Label: "roads"}, nil, 409, "latest answer"},
		{"change to a class not in the codebook", "PUT", "/api/v1/me/labels/last", "ann1", ChangeRequest{Item: item, Label: "lakes"}, nil, 422, "not a class"},
		{"practice answer with no practice", "POST", "/api/v1/practice/answers", "ann1", PracticeAnswer{Item: item, Label: "roads"}, nil, 409, "practice shows now"},
		{"retry with no failed check", "POST", "/api/v1/practice/retry", "ann1", nil, nil, 409, "only a failed check"},
		{"annotator revokes a token", "DELETE", "/api/v1/tokens/0123456789abcdef", "ann1", nil, nil, 403, "admin"},
		{"annotator issues a token", "POST", "/api/v1/people/ann1/tokens", "ann1", nil, nil, 403, "admin"},
		{"revoke an unknown token", "DELETE", "/api/v1/tokens/0123456789abcdef", "boss", nil, nil, 404, "no such token"},
		{"tokens of an unknown person", "DELETE", "/api/v1/people/nobody/tokens", "boss", nil, nil, 404, "no person"},
		{"annotator reads the metrics", "GET", "/metrics", "ann1", nil, nil, 403, "admin"},
		{"metrics without a token", "GET", "/metrics", "", nil, nil, 401, "sign in"},
		{"item text with a NUL byte", "POST", "/api/v1/items", "boss", "id,text\nz1,a\x00b\n", []string{"Content-Type", "text/csv"}, 422, "NUL byte"},
		{"annotator id with an escape sequence", "POST", "/api/v1/labels/import", "boss", "item,annotator,label\nt000,\"x\x1b[2J\",roads\n", []string{"Content-Type", "text/csv"}, 422, "control character"},
		{"an empty label import", "POST", "/api/v1/labels/import", "boss", "item,annotator,label\n", []string{"Content-Type", "text/csv"}, 422, "no labels"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			before := f.snapshot()
			var r reply
			if ch, ok := c.body.(chunked); ok {
				r = f.doChunked(c.method, c.path, c.person, string(ch), c.hdr...)
			} else {
				r = f.do(c.method, c.path, c.person, c.body, c.hdr...)
			}
			if r.status != c.status {
				t.Errorf("status %d, want %d: %s", r.status, c.status, r.body)
			}
			var e Error
			if err := json.Unmarshal(r.body, &e); err != nil || e.Error == "" || e.Status != r.status {
				t.Errorf("body is not a JSON error: %q (%v)", r.body, err)
			}
			if !strings.Contains(e.Error, c.contains) {
				t.Errorf("error %q does not say %q", e.Error, c.contains)
			}
			if ct := r.header.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				t.Errorf("Content-Type %q", ct)
			}
			if after := f.snapshot(); after != before {
				t.Errorf("the request changed the store or the pool:\nbefore %s\nafter  %s", before, after)
			}
		})
	}
	// The good request still works after all that.
	if r := f.label("ann1", lease, item, "roads", "fine"); r.status != http.StatusCreated {
		t.Errorf("good label: %d %s", r.status, r.body)
	}
}

type chunked string

// doChunked sends a body without a Content-Length.
func (f *fixture) doChunked(method, path, person, body string, hdr ...string) reply {
	f.t.Helper()
	pr, pw := io.Pipe()
	go func() {
		pw.Write([]byte(body))
		pw.Close()
	}()
	req, err := http.NewRequest(method, f.ts.URL+path, pr)
	if err != nil {
		f.t.Fatal(err)
	}
	req.Header.Set("Authorization", "Bearer "+f.tokens[person])
	req.Header.Set("Content-Type", "application/json")
	for i := 0; i+1 < len(hdr); i += 2 {
		req.Header.Set(hdr[i], hdr[i+1])
	}
	resp, err := f.ts.Client().Do(req)
	if err != nil {
		f.t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return reply{status: resp.StatusCode, body: b, header: resp.Header}
}

// pngBytes is a 1×1 PNG.
var pngBytes = []byte{0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0x00, 0x00, 0x00, 0x0d, 0x49, 0x48, 0x44, 0x52,
	0x00, 0x00, 0x00, 0x01, 0x00, 0x00, 0x00, 0x01, 0x08, 0x06, 0x00, 0x00, 0x00, 0x1f, 0x15, 0xc4, 0x89, 0x00, 0x00, 0x00,
	0x0d, 0x49, 0x44, 0x41, 0x54, 0x78, 0x9c, 0x63, 0x60, 0x60, 0x60, 0xf8, 0x0f, 0x00, 0x01, 0x04, 0x01, 0x00, 0x5f, 0x6a,
	0x2d, 0x5e, 0x00, 0x00, 0x00, 0x00, 0x49, 0x45, 0x4e, 0x44, 0xae, 0x42, 0x60, 0x82}
