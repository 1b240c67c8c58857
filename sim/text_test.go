package sim

import (
	"reflect"
	"strings"
	"testing"
	"unicode/utf8"
)

func TestTextDeterministic(t *testing.T) {
	a, err := GenerateText(TextConfig{Reports: 80}, 7)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := GenerateText(TextConfig{Reports: 80}, 7)
	if !reflect.DeepEqual(a, b) {
		t.Fatal("same seed gave different text scenarios")
	}
	c, _ := GenerateText(TextConfig{Reports: 80}, 8)
	if reflect.DeepEqual(a.Items, c.Items) {
		t.Fatal("different seeds gave the same items")
	}
}

func TestTextItems(t *testing.T) {
	ts, err := GenerateText(TextConfig{}, 1)
	if err != nil {
		t.Fatal(err)
	}
	if n := len(ts.Items); n < 2000 || n > 2700 {
		t.Fatalf("%d sentences from 600 reports, want about 2,300", n)
	}
	topic, urgency := TopicCodebook(), UrgencyCodebook()
	perParent := map[string]int{}
	classCount := map[string]int{}
	ambiguous := 0
	for i, it := range ts.Items {
		if err := it.Validate(); err != nil {
			t.Fatalf("item %d: %v", i, err)
		}
		if !utf8.ValidString(it.Text) || strings.TrimSpace(it.Text) == "" {
			t.Fatalf("item %s: bad text %q", it.ID, it.Text)
		}
		if it.Position != perParent[it.Parent] {
			t.Fatalf("item %s: position %d, want %d", it.ID, it.Position, perParent[it.Parent])
		}
		perParent[it.Parent]++
		for _, k := range []string{"site", "river", "year", "season", "reporter", "experience"} {
			if it.Covariates[k] == "" {
				t.Fatalf("item %s: no covariate %s", it.ID, k)
			}
		}
		if _, ok := topic.Index(ts.Topic[it.ID]); !ok {
			t.Fatalf("item %s: topic %q", it.ID, ts.Topic[it.ID])
		}
		if _, ok := urgency.Index(ts.Urgency[it.ID]); !ok {
			t.Fatalf("item %s: urgency %q", it.ID, ts.Urgency[it.ID])
		}
		if ts.TopicTasks[i].Item != it.ID || ts.TopicTasks[i].Truth != ts.Topic[it.ID] || ts.UrgencyTasks[i].Truth != ts.Urgency[it.ID] {
			t.Fatalf("item %s: tasks do not match the truth", it.ID)
		}
		classCount[ts.Topic[it.ID]]++
		if ts.TopicTasks[i].Alt != "" {
			ambiguous++
		}
	}
	if len(perParent) != 600 {
		t.Errorf("%d reports, want 600", len(perParent))
	}
	for p, n := range perParent {
		if n < 2 || n > 6 {
			t.Errorf("report %s has %d sentences, want 2–6", p, n)
		}
	}
	for _, k := range topic.Keys() {
		if s := float64(classCount[k]) / float64(len(ts.Items)); s < 0.1 || s > 0.35 {
			t.Errorf("topic %s has share %.3f, want 0.10–0.35", k, s)
		}
	}
	if s := float64(ambiguous) / float64(len(ts.Items)); s < 0.04 || s > 0.2 {
		t.Errorf("ambiguous share %.3f, want 0.04–0.20", s)
	}
}

// The true urgency must show in the wording, but not fix it.
func TestTextUrgencySignal(t *testing.T) {
	ts, err := GenerateText(TextConfig{}, 3)
	if err != nil {
		t.Fatal(err)
	}
	level := map[string]float64{"none": 0, "low": 1, "medium": 2, "high": 3}
	var hot, cold, hotN, coldN float64
	typos := 0
	known := map[string]bool{}
	for _, tp := range append(append([]template{}, templates...), ambiguous...) {
		for _, w := range strings.Fields(strings.ReplaceAll(tp.text, "{", " {")) {
			known[strings.Trim(w, ",.")] = true
		}
	}
	for _, ws := range vocab {
		for _, w := range ws {
			for _, f := range strings.Fields(w) {
				known[f] = true
			}
		}
	}
	for _, lv := range levelVocab {
		for _, ws := range lv {
			for _, w := range ws {
				for _, f := range strings.Fields(w) {
					known[strings.Trim(f, ",")] = true
				}
			}
		}
	}
	for _, w := range fillers {
		for _, f := range strings.Fields(w) {
			known[strings.Trim(f, ",")] = true
		}
	}
	var unknown []string
	for _, it := range ts.Items {
		lt := strings.ToLower(it.Text)
		u := level[ts.Urgency[it.ID]]
		switch {
		case strings.Contains(lt, "today") && strings.Contains(lt, "needs someone"), strings.Contains(lt, "urgently"), strings.Contains(lt, "masses of"), strings.Contains(lt, "off the scale"):
			hot += u
			hotN++
		case strings.Contains(lt, "nothing to worry about"), strings.Contains(lt, "only minor"), strings.Contains(lt, "a little"):
			cold += u
			coldN++
		}
		for _, w := range strings.Fields(strings.Trim(lt, ".!")) {
			w = strings.Trim(w, ",.!")
			if len(w) >= 5 && isLetters(w) && !known[w] {
				typos++
				unknown = append(unknown, w)
			}
		}
	}
	if hotN < 20 || coldN < 20 {
		t.Fatalf("too few cue sentences: %v hot, %v cold", hotN, coldN)
	}
	if h, c := hot/hotN, cold/coldN; h < 2.3 || c > 1.5 {
		t.Errorf("mean urgency with urgent cues %.2f (want ≥ 2.3), with mild cues %.2f (want ≤ 1.5)", h, c)
	}
	if typos < 50 || typos > 600 {
		t.Errorf("%d misspelt words in %d sentences, want some noise (50–600); e.g. %q", typos, len(ts.Items), unknown[:min(5, len(unknown))])
	}
}
