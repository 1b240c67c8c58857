package api

import (
	"encoding/json"
	"net/http"
	"regexp"
	"sort"
	"strings"
	"testing"
)

// TestOpenAPI checks the hand-written OpenAPI document against the server:
// every /api/v1 route is documented, every documented path and method is
// served, and every schema reference resolves.
func TestOpenAPI(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 2, nil, 1)
	r := f.do("GET", "/api/v1/openapi.json", "", nil)
	if r.status != http.StatusOK {
		t.Fatalf("openapi.json: %d", r.status)
	}
	var doc struct {
		OpenAPI    string                                `json:"openapi"`
		Paths      map[string]map[string]json.RawMessage `json:"paths"`
		Components struct {
			Schemas map[string]json.RawMessage `json:"schemas"`
		} `json:"components"`
	}
	if err := json.Unmarshal(r.body, &doc); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(doc.OpenAPI, "3.") {
		t.Errorf("openapi version %q", doc.OpenAPI)
	}
	param := regexp.MustCompile(`\{([^}]+)\}`)
	documented := map[string]bool{}
	for p, ops := range doc.Paths {
		for m, op := range ops {
			if m == "parameters" {
				continue
			}
			documented[strings.ToUpper(m)+" "+param.ReplaceAllString(p, ":$1")] = true
			var o struct {
				Summary   string                     `json:"summary"`
				Responses map[string]json.RawMessage `json:"responses"`
			}
			if err := json.Unmarshal(op, &o); err != nil || o.Summary == "" || len(o.Responses) == 0 {
				t.Errorf("%s %s: no summary or responses (%v)", m, p, err)
			}
		}
	}
	served := map[string]bool{}
	for _, rt := range f.sv.e.Routes() {
		if strings.HasPrefix(rt.Path, "/api/") {
			served[rt.Method+" "+rt.Path] = true
		}
	}
	for k := range served {
		if !documented[k] {
			t.Errorf("route %s is not in openapi.json", k)
		}
	}
	var keys []string
	for k := range documented {
		keys = append(keys, k)
		if !served[k] {
			t.Errorf("openapi.json documents %s, which the server does not route", k)
		}
	}
	// Each documented route answers (not "no such route" / wrong method).
	sort.Strings(keys)
	for _, k := range keys {
		m, p, _ := strings.Cut(k, " ")
		p = strings.ReplaceAll(p, ":id", "x")
		if k == "POST /api/v1/rounds" {
			continue // starts a round; answered in the round tests
		}
		r := f.do(m, p, "boss", nil)
		if r.status == http.StatusMethodNotAllowed || strings.Contains(string(r.body), "no such route") {
			t.Errorf("%s: %d %s", k, r.status, r.body)
		}
	}
	refs := regexp.MustCompile(`"\$ref":\s*"#/components/schemas/([^"]+)"`)
	for _, m := range refs.FindAllSubmatch(r.body, -1) {
		if _, ok := doc.Components.Schemas[string(m[1])]; !ok {
			t.Errorf("unresolved reference to schema %s", m[1])
		}
	}
	if len(documented) < 30 {
		t.Errorf("only %d operations documented", len(documented))
	}
}
