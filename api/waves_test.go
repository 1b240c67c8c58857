package api

import (
	"encoding/json"
	"net/http"
	"testing"
)

// The team opens a second crowd wave through the API: labels sent from then
// on belong to it; annotators may not open one.
func TestOpenWave(t *testing.T) {
	f := newFixture(t, Config{Practice: -1, Check: -1}, 5, nil, 2)
	lease, item := f.next("ann1")
	if r := f.label("ann1", lease, item, "roads", "k-1"); r.status != http.StatusCreated {
		t.Fatalf("label: %d %s", r.status, r.body)
	}
	if r := f.do("POST", "/api/v1/waves", "ann1", nil); r.status != http.StatusForbidden {
		t.Errorf("an annotator opened a wave: %d %s", r.status, r.body)
	}
	r := f.do("POST", "/api/v1/waves", "boss", nil)
	if r.status != http.StatusCreated {
		t.Fatalf("open wave: %d %s", r.status, r.body)
	}
	var opened struct {
		Opened int `json:"opened"`
	}
	json.Unmarshal(r.body, &opened)
	if opened.Opened != 2 {
		t.Errorf("opened wave %d, want 2 (%s)", opened.Opened, r.body)
	}
	l2, i2 := f.next("ann2")
	if r := f.label("ann2", l2, i2, "other", "k-2"); r.status != http.StatusCreated {
		t.Fatalf("label in wave 2: %d %s", r.status, r.body)
	}
	ls, err := f.st.LabelsFor(i2)
	if err != nil || len(ls) == 0 || ls[len(ls)-1].Wave != 2 || ls[len(ls)-1].Annotator != "ann2" {
		t.Errorf("labels of %s: %+v %v, want ann2's last of wave 2", i2, ls, err)
	}
	r = f.do("GET", "/api/v1/waves", "boss", nil)
	var got struct {
		Waves []struct {
			Wave, Labels int
			Open         bool
		} `json:"waves"`
	}
	if err := json.Unmarshal(r.body, &got); err != nil || len(got.Waves) != 2 || got.Waves[0].Labels != 1 || got.Waves[1].Labels != 1 || !got.Waves[1].Open {
		t.Errorf("GET waves: %d %s", r.status, r.body)
	}
}
