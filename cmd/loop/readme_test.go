package main

import (
	"bufio"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReadmeWalkthrough runs every `$ loop …` line of the README's code
// blocks, in order, the way a newcomer would (the demo with --small, to keep
// the suite fast), and checks each exits as the README shows: 0, or 1 where
// the README prints an error.
func TestReadmeWalkthrough(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the whole walkthrough")
	}
	root, err := filepath.Abs("../..")
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(root, "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	type step struct {
		line    string
		wantErr bool
		block   int
	}
	var steps []step
	sc := bufio.NewScanner(f)
	inBlock, block := false, 0
	for sc.Scan() {
		l := sc.Text()
		if strings.HasPrefix(l, "```") {
			inBlock = !inBlock
			block++
			continue
		}
		if !inBlock {
			continue
		}
		if strings.HasPrefix(l, "$ loop ") {
			steps = append(steps, step{line: strings.TrimPrefix(l, "$ "), block: block})
			continue
		}
		// An error line belongs to the command above it in the same block.
		if len(steps) > 0 && steps[len(steps)-1].block == block && strings.HasPrefix(l, "loop: ") {
			steps[len(steps)-1].wantErr = true
		}
	}
	if len(steps) < 15 {
		t.Fatalf("found only %d walkthrough commands in README.md", len(steps))
	}
	tmp := t.TempDir()
	t.Chdir(tmp)
	repl := strings.NewReplacer(
		"/tmp/handoff-demo", filepath.Join(tmp, "handoff-demo"),
		"/tmp/patients", filepath.Join(tmp, "patients"),
		"testdata/", filepath.Join(root, "testdata")+"/",
	)
	for _, s := range steps {
		line := s.line
		if i := strings.Index(line, " | "); i >= 0 {
			line = line[:i]
		}
		args := strings.Fields(repl.Replace(line))[1:]
		code, _, errs := loop(t, args...)
		if s.wantErr && code != 1 {
			t.Errorf("%s: exit %d, the README shows an error (exit 1)", s.line, code)
		}
		if !s.wantErr && code != 0 {
			t.Errorf("%s: exit %d\n%s", s.line, code, errs)
		}
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
