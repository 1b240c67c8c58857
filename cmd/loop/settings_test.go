package main

import (
	"encoding/json"
	"regexp"
	"strings"
	"testing"

	"handoff/round"
	"handoff/selector"
	"handoff/store"
)

// Numbers outside a setting's range are usage errors (exit 2), whether
// given as a flag for one run or stored with `loop config set`, and change
// nothing.
func TestSettingsOutOfRangeAreUsageErrors(t *testing.T) {
	proj, _ := newProject(t)
	cases := [][]string{
		{"round", proj, "--n", "0"},
		{"round", proj, "--n", "-5"},
		{"round", proj, "-n", "x"},
		{"round", proj, "--held-out", "1.5"},
		{"round", proj, "--held-out", "0"},
		{"round", proj, "--max-error", "2"},
		{"round", proj, "--confidence", "1"},
		{"round", proj, "--reference-level", "1.2"},
		{"round", proj, "--strategy", "psychic"},
		{"round", proj, "--shares", "conflict=0.1"},
		{"next", proj, "--n", "0"},
		{"next", proj, "-n", "-5"},
		{"next", proj, "--audit", "0"},
		{"verdict", proj, "--max-error", "2"},
		{"autolabel", proj, "--threshold", "1.5"},
		{"autolabel", proj, "--threshold", "0"},
		{"config", proj, "set", "max-error", "2"},
		{"config", proj, "set", "batch", "0"},
		{"config", proj, "set", "held-out", "1.5"},
		{"config", proj, "set", "no-such-key", "1"},
		{"config", proj, "set", "max-error"},
	}
	for _, args := range cases {
		code, _, errs := loop(t, args...)
		if code != 2 {
			t.Errorf("loop %v: exit %d, want 2 (%s)", args, code, errs)
		}
	}
	s, err := store.Open(proj)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, err := s.State("settings"); err == nil {
		t.Error("a refused setting was stored")
	}
	if rs, _ := s.Rounds(); len(rs) != 0 {
		t.Errorf("%d rounds stored by refused commands", len(rs))
	}
}

func TestConfigStoresSettingsWithAnAuditTrail(t *testing.T) {
	proj, _ := newProject(t)
	out := mustLoop(t, "config", proj)
	if !regexp.MustCompile(`(?m)^  max-error 0\.05 \(default\)`).MatchString(out) || !strings.Contains(out, "held-out-min") {
		t.Errorf("config before any change:\n%s", out)
	}
	if got := mustLoop(t, "config", proj, "set", "max-error", "0.03"); !strings.Contains(got, "max-error 0.05 → 0.03") {
		t.Errorf("config set says %q", got)
	}
	mustLoop(t, "config", proj, "set", "shares", "model-unsure=0.5,held-out=0.3,reference=0.2")
	out = mustLoop(t, "config", proj)
	if !regexp.MustCompile(`(?m)^  max-error 0\.03 \(stored\)`).MatchString(out) || !strings.Contains(out, "held-out=0.3,reference=0.2,model-unsure=0.5") {
		t.Errorf("config after set:\n%s", out)
	}
	var rows []struct{ Key, Value, Source, Range, Doc string }
	if err := json.Unmarshal([]byte(mustLoop(t, "config", proj, "--json")), &rows); err != nil || len(rows) != len(round.Keys()) {
		t.Fatalf("config --json: %v, %d rows", err, len(rows))
	}
	s, err := store.Open(proj)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	trail, _ := s.Audit()
	n := 0
	for _, e := range trail {
		if e.Action == "settings.set" {
			n++
			if !strings.Contains(e.Source, "loop config") {
				t.Errorf("settings change recorded with source %q", e.Source)
			}
		}
	}
	if n != 2 {
		t.Errorf("%d settings changes in the audit trail, want 2", n)
	}
	cfg, list, err := round.Settings(s)
	if err != nil || cfg.Verdict.MaxError != 0.03 {
		t.Fatalf("stored settings: %v %v", cfg.Verdict.MaxError, err)
	}
	for _, x := range list {
		if x.Key == "max-error" && x.Source != "stored" || x.Key == "batch" && x.Source != "default" {
			t.Errorf("setting %+v has the wrong source", x)
		}
	}
}

// `loop next --help` names exactly the reasons a batch can hold, and its
// examples run.
func TestNextHelpListsTheReasons(t *testing.T) {
	out := mustLoop(t, "next", "--help")
	for _, r := range selector.Reasons {
		if !strings.Contains(out, "  "+string(r)+" ") {
			t.Errorf("next --help does not explain the reason %q", r)
		}
	}
	for _, m := range regexp.MustCompile(`--shares (\S+=\S+)`).FindAllStringSubmatch(out, -1) {
		if _, err := round.ParseShares(m[1]); err != nil {
			t.Errorf("next --help example --shares %s: %v", m[1], err)
		}
	}
	if strings.Contains(out, "conflict=") {
		t.Error("next --help still names the reason conflict, which does not exist")
	}
	if !strings.Contains(out, "-n, --n") {
		t.Error("next has no -n short form")
	}
}
