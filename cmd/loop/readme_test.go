package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// readmeStep is one `$ loop …` line of the README's code blocks with the
// output pasted under it.
type readmeStep struct {
	line     string   // the command as typed
	out      []string // the pasted output; a line "…" stands for lines left out
	from, to int      // the pasted output's lines in the README (0-based, to exclusive)
}

// readmeSteps reads the walkthrough from the README's lines: each
// `$ loop …` line of a code block and the lines under it up to the next
// command or the end of the block.
func readmeSteps(lines []string) []readmeStep {
	var steps []readmeStep
	inBlock, cur := false, -1
	for i, l := range lines {
		switch {
		case strings.HasPrefix(l, "```"):
			inBlock, cur = !inBlock, -1
		case !inBlock:
		case strings.HasPrefix(l, "$ loop "):
			steps = append(steps, readmeStep{line: strings.TrimPrefix(l, "$ "), from: i + 1, to: i + 1})
			cur = len(steps) - 1
		case strings.HasPrefix(l, "$ ") || strings.Contains(l, "$ loop "):
			cur = -1 // another command, or one typed elsewhere (proj$ …)
		case cur >= 0:
			steps[cur].out = append(steps[cur].out, l)
			steps[cur].to = i + 1
		}
	}
	return steps
}

// normalise makes outputs comparable across runs and machines: the
// folders a test runs in become the README's, and times, durations and Go
// versions become placeholders.
func normalise(s string, paths *strings.Replacer) string {
	s = paths.Replace(s)
	s = timeRE.ReplaceAllString(s, "TIME")
	s = durationRE.ReplaceAllString(s, "DURATION")
	return goVersionRE.ReplaceAllString(s, "GOVERSION")
}

var (
	timeRE      = regexp.MustCompile(`\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?(Z|[+-]\d\d:\d\d)`)
	durationRE  = regexp.MustCompile(`\b\d+(\.\d+)?(ns|µs|ms|s)\b`)
	goVersionRE = regexp.MustCompile(`\bgo1\.\d+(\.\d+)?\b`)
)

// matchPasted compares a command's output with the pasted lines: a line
// "…" in the pasted output stands for any number of lines, every other
// pasted line must appear as printed, in order, the first at the top and
// (unless the paste ends with "…") the last at the bottom. It returns ""
// or what differs.
func matchPasted(pasted, got []string) string {
	at := 0
	for k := 0; k < len(pasted); {
		if pasted[k] == "…" {
			k++
			if k == len(pasted) {
				return ""
			}
			// The next run of pasted lines may start anywhere below.
			j := k
			for j < len(pasted) && pasted[j] != "…" {
				j++
			}
			run := pasted[k:j]
			if j == len(pasted) { // the paste's tail: the last lines
				at = max(at, len(got)-len(run))
			} else {
				for at < len(got) && got[at] != run[0] {
					at++
				}
			}
			continue
		}
		if at >= len(got) {
			return fmt.Sprintf("pasted line %d %q: the output has only %d lines", k+1, pasted[k], len(got))
		}
		if got[at] != pasted[k] {
			return fmt.Sprintf("pasted line %d:\n  README  %q\n  printed %q", k+1, pasted[k], got[at])
		}
		at++
		k++
	}
	if at != len(got) {
		return fmt.Sprintf("the output goes on after the pasted lines with %q (%d more lines)", got[at], len(got)-at)
	}
	return ""
}

// repaste returns the new output in the shape of the pasted one: all of it
// when nothing was left out, otherwise as many lines at the top as were
// pasted before the first "…" and, when the paste ended with lines after
// its last "…", as many at the bottom.
func repaste(pasted, got []string) []string {
	first := -1
	last := -1
	for i, l := range pasted {
		if l == "…" {
			if first < 0 {
				first = i
			}
			last = i
		}
	}
	if first < 0 {
		return got
	}
	head := min(first, len(got))
	out := append(append([]string(nil), got[:head]...), "…")
	if tail := len(pasted) - last - 1; tail > 0 && len(got)-tail > head {
		out = append(out, got[len(got)-tail:]...)
	}
	return out
}

// TestReadmeWalkthrough runs every `$ loop …` line of the README's code
// blocks, in order, as a newcomer would — the whole demo included, as the
// README runs it — and compares what each prints (standard output, then
// standard error) with the output pasted under it, after normalise. With
// HANDOFF_UPDATE_README=1 it writes the new outputs into the README
// instead (in the pasted shape, repaste), for when a command's output
// changed on purpose.
func TestReadmeWalkthrough(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the whole walkthrough, the full demo included")
	}
	root, err := filepath.Abs("../..")
	if err != nil {
		t.Fatal(err)
	}
	readme := filepath.Join(root, "README.md")
	b, err := os.ReadFile(readme)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(b), "\n")
	steps := readmeSteps(lines)
	if len(steps) < 15 {
		t.Fatalf("found only %d walkthrough commands in README.md", len(steps))
	}
	tmp := t.TempDir()
	t.Chdir(tmp)
	to := strings.NewReplacer(
		"/tmp/handoff-demo", filepath.Join(tmp, "handoff-demo"),
		"/tmp/patients", filepath.Join(tmp, "patients"),
		"testdata/", filepath.Join(root, "testdata")+"/",
	)
	back := strings.NewReplacer(
		filepath.Join(tmp, "handoff-demo"), "/tmp/handoff-demo",
		filepath.Join(tmp, "patients"), "/tmp/patients",
		filepath.Join(root, "testdata")+"/", "testdata/",
	)
	update := os.Getenv("HANDOFF_UPDATE_README") == "1"
	type change struct {
		from, to int
		lines    []string
	}
	var changes []change
	for _, s := range steps {
		line, piped := s.line, false
		if i := strings.Index(line, " | "); i >= 0 {
			line, piped = line[:i], true
		}
		args := strings.Fields(to.Replace(line))[1:]
		code, out, errs := loop(t, args...)
		wantErr := false
		for _, l := range s.out {
			wantErr = wantErr || strings.HasPrefix(l, "loop: ")
		}
		if wantErr && code != 1 || !wantErr && code != 0 {
			t.Errorf("%s: exit %d, the README shows %s\n%s", s.line, code, map[bool]string{true: "an error (exit 1)", false: "success"}[wantErr], errs)
			continue
		}
		if piped {
			continue // the README shows what the pipe printed
		}
		got := strings.Split(strings.TrimRight(normalise(out+errs, back), "\n"), "\n")
		if len(got) == 1 && got[0] == "" {
			got = nil
		}
		pasted := strings.Split(normalise(strings.Join(s.out, "\n"), back), "\n")
		if len(s.out) == 0 {
			pasted = nil
		}
		if diff := matchPasted(pasted, got); diff != "" {
			if update {
				changes = append(changes, change{s.from, s.to, repaste(s.out, got)})
				continue
			}
			t.Errorf("%s: the output differs from the README's (HANDOFF_UPDATE_README=1 go test -run TestReadmeWalkthrough ./cmd/loop rewrites it): %s", s.line, diff)
		}
	}
	if len(changes) > 0 {
		for i := len(changes) - 1; i >= 0; i-- {
			c := changes[i]
			lines = append(lines[:c.from], append(c.lines, lines[c.to:]...)...)
		}
		if err := os.WriteFile(readme, []byte(strings.Join(lines, "\n")), 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("rewrote the output of %d commands in README.md", len(changes))
	}
	// The demo workspace holds at least 2,000 items of both kinds, 10,000
	// labels and 30 annotators (the foundation issue's promise).
	code, out, errs := loop(t, "status", filepath.Join(tmp, "handoff-demo"), "--json")
	if code != 0 {
		t.Fatalf("status --json: exit %d\n%s", code, errs)
	}
	var ws struct {
		Items       int            `json:"items"`
		ItemsByKind map[string]int `json:"items_by_kind"`
		Labels      int            `json:"labels"`
		Annotators  int            `json:"annotators"`
	}
	if err := json.Unmarshal([]byte(out), &ws); err != nil {
		t.Fatal(err)
	}
	if ws.Items < 2000 || ws.ItemsByKind["text"] == 0 || ws.ItemsByKind["image"] == 0 || ws.Labels < 10000 || ws.Annotators < 30 {
		t.Errorf("demo workspace: %+v, want ≥ 2,000 items of both kinds, ≥ 10,000 labels, ≥ 30 annotators", ws)
	}
}

// TestMatchPasted checks the comparison of a command's output with its
// pasted form, elisions included.
func TestMatchPasted(t *testing.T) {
	got := []string{"a", "b", "c", "d", "e"}
	cases := []struct {
		pasted []string
		ok     bool
	}{
		{[]string{"a", "b", "c", "d", "e"}, true},
		{[]string{"a", "b", "…"}, true},
		{[]string{"a", "…", "d", "e"}, true},
		{[]string{"a", "…", "c", "…"}, true},
		{[]string{"a", "b", "c", "d"}, false},
		{[]string{"a", "x", "…"}, false},
		{[]string{"a", "…", "e", "d"}, false},
		{[]string{"a", "b", "c", "d", "e", "f"}, false},
	}
	for _, c := range cases {
		if d := matchPasted(c.pasted, got); (d == "") != c.ok {
			t.Errorf("matchPasted(%q): %q, want ok %v", c.pasted, d, c.ok)
		}
	}
	if r := repaste([]string{"x", "…", "y"}, got); strings.Join(r, " ") != "a … e" {
		t.Errorf("repaste = %q", r)
	}
	if s := normalise("took 1.5s on go1.26 at 2026-01-02T03:04:05Z in /x/y", strings.NewReplacer("/x", "/tmp")); s != "took DURATION on GOVERSION at TIME in /tmp/y" {
		t.Errorf("normalise = %q", s)
	}
}
