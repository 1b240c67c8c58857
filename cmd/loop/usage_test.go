package main

import (
	"fmt"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// roundProject makes a project of 150 short reports, 90 labelled by three
// careful annotators and "mal", who answers every gold item wrong (the
// gold-screen rule drops mal), with 12 gold answers, and runs one round.
func roundProject(t *testing.T) (proj, dir string) {
	t.Helper()
	dir = t.TempDir()
	proj = filepath.Join(dir, "proj")
	mustLoop(t, "init", proj, "--codebook", write(t, dir, "cb.yaml", codebookYAML), "--quiet")
	words := [][]string{{"oil", "slick", "foam", "sheen", "diesel"}, {"heron", "otter", "duck", "kingfisher", "vole"}, {"meeting", "bins", "signs", "parking", "rota"}}
	keys := []string{"pollution", "wildlife", "other"}
	var items, labels, gold strings.Builder
	items.WriteString("id,text\n")
	labels.WriteString("item,annotator,label\n")
	gold.WriteString("item,label\n")
	for i := 0; i < 150; i++ {
		c := i % 3
		fmt.Fprintf(&items, "r%02d,%s and %s seen near stone %d\n", i, words[c][i%5], words[c][(i+2)%5], i)
		if i >= 90 {
			continue // not labelled yet
		}
		for _, a := range []string{"ann", "bob", "cat"} {
			fmt.Fprintf(&labels, "r%02d,%s,%s\n", i, a, keys[c])
		}
		if i < 12 {
			fmt.Fprintf(&gold, "r%02d,%s\n", i, keys[c])
			fmt.Fprintf(&labels, "r%02d,mal,%s\n", i, keys[(c+1)%3])
		}
	}
	mustLoop(t, "items", "add", proj, write(t, dir, "items.csv", items.String()), "--quiet")
	mustLoop(t, "labels", "add", proj, write(t, dir, "labels.csv", labels.String()), "--quiet")
	mustLoop(t, "labels", "add", proj, write(t, dir, "gold.csv", gold.String()), "--gold", "--quiet")
	mustLoop(t, "config", proj, "set", "batch", "20", "--quiet")
	mustLoop(t, "round", proj, "--quiet")
	return proj, dir
}

// TestCommandLineAsPromised runs the command line's promises one by one:
// invalid numbers are usage errors (exit 2) that change nothing; -n is
// short for --n; --quiet leaves confirmations out and results in; init
// confirms on stdout; codebook errors speak plainly; `loop next --help` shows examples that parse and run;
// agreement lists an annotator the cleaning rules dropped once, apart from
// the kappas.
func TestCommandLineAsPromised(t *testing.T) {
	proj, dir := roundProject(t)
	cb := write(t, dir, "cb2.yaml", codebookYAML)
	type check func(t *testing.T, out, errs string)
	has := func(s string) check {
		return func(t *testing.T, out, errs string) {
			if !strings.Contains(out, s) {
				t.Errorf("stdout lacks %q:\n%s", s, out)
			}
		}
	}
	silent := func(t *testing.T, out, errs string) {
		if out != "" || errs != "" {
			t.Errorf("--quiet printed stdout %q, stderr %q", out, errs)
		}
	}
	lines := func(n int) check {
		return func(t *testing.T, out, errs string) {
			if got := strings.Count(out, "\n"); got != n+1 { // with the CSV header
				t.Errorf("%d lines, want %d items and a header:\n%s", got, n, out)
			}
		}
	}
	once := func(t *testing.T, out, errs string) {
		if strings.Count(out, "mal") != 1 || !regexp.MustCompile(`(?m)^not counted, .*: mal$`).MatchString(out) || strings.Contains(out, "undefined") {
			t.Errorf("mal is not listed once, apart:\n%s", out)
		}
	}
	cases := []struct {
		name string
		args []string
		code int
		want check
	}{
		{"--n 0", []string{"next", proj, "--n", "0"}, 2, nil},
		{"--n -5", []string{"next", proj, "--n", "-5"}, 2, nil},
		{"-n 0", []string{"round", proj, "-n", "0", "--force"}, 2, nil},
		{"--held-out 1.5", []string{"round", proj, "--held-out", "1.5", "--force"}, 2, nil},
		{"--max-error 2", []string{"verdict", proj, "--max-error", "2"}, 2, nil},
		{"--threshold 1.5", []string{"autolabel", proj, "--threshold", "1.5"}, 2, nil},
		{"--shares with no such reason", []string{"next", proj, "--shares", "conflict=0.1"}, 2, func(t *testing.T, out, errs string) {
			if !strings.Contains(errs, `no reason "conflict"`) {
				t.Errorf("stderr %q does not name the reason", errs)
			}
		}},
		{"-n short form", []string{"next", proj, "-n", "5"}, 0, lines(5)},
		{"--n long form", []string{"next", proj, "--n", "7"}, 0, lines(7)},
		{"init confirms on stdout", []string{"init", filepath.Join(dir, "p2"), "--codebook", cb}, 0, has("created project ")},
		{"init --quiet", []string{"init", filepath.Join(dir, "p3"), "--codebook", cb, "--quiet"}, 0, silent},
		{"items add --quiet: the counts are its result", []string{"items", "add", filepath.Join(dir, "p3"), write(t, dir, "i3.csv", "id,text\nx1,hello\n"), "--quiet"}, 0, has("items: 1 added")},
		{"labels add --quiet: the counts are its result", []string{"labels", "add", filepath.Join(dir, "p3"), write(t, dir, "l3.csv", "item,annotator,label\nx1,ann,other\n"), "--quiet"}, 0, has("labels: 1 added")},
		{"config set --quiet", []string{"config", filepath.Join(dir, "p3"), "set", "batch", "50", "--quiet"}, 0, silent},
		{"config set confirms", []string{"config", filepath.Join(dir, "p3"), "set", "batch", "60"}, 0, has("batch 50 → 60")},
		{"a result under --quiet", []string{"status", filepath.Join(dir, "p3"), "--quiet"}, 0, has("labels: 1")},
		{"agreement: dropped once, apart", []string{"agreement", proj, "--reps", "50"}, 0, once},
	}
	// Codebook YAML errors name the file and line in plain words, without
	// Go's type names or YAML's tags.
	for i, y := range []struct{ yaml, line string }{
		{"name: x\nquestion: q\nclasses: 5\n", ":3: "},
		{"name: x\nquestion: q\nclasses:\n  - key: [1,2]\n  - key: b\n", ":4: "},
		{"name: [x]\nquestion: q\nclasses:\n  - key: a\n  - key: b\n", ":1: "},
		{"question: q\nscale: {a: 1}\nclasses:\n  - key: a\n  - key: b\n", ":2: "},
		{"question: q\nclasses:\n  - a\n  - b\n", ":3: "},
		{"question: q\nclasses:\n  - {key: a, description: oil, foam}\n  - key: b\n", ":3: "},
	} {
		f := write(t, dir, fmt.Sprintf("bad%d.yaml", i), y.yaml)
		cases = append(cases, struct {
			name string
			args []string
			code int
			want check
		}{fmt.Sprintf("codebook error %d", i), []string{"init", filepath.Join(dir, fmt.Sprintf("bad%d", i)), "--codebook", f}, 1, func(t *testing.T, out, errs string) {
			if !strings.Contains(errs, filepath.Base(f)+y.line) || regexp.MustCompile(`!!|handoff\.|\[\]|map\[|unmarshal|int64|float64`).MatchString(errs) {
				t.Errorf("codebook %q: %s", y.yaml, errs)
			}
		}})
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := loop(t, c.args...)
			if code != c.code {
				t.Fatalf("loop %v: exit %d, want %d\n%s", c.args, code, c.code, errs)
			}
			if c.want != nil {
				c.want(t, out, errs)
			}
		})
	}

	// The examples of `loop next --help` parse: none is a usage error, and
	// those that write the round's batch do.
	help := mustLoop(t, "next", "--help")
	n := 0
	for _, l := range strings.Split(help, "\n") {
		l = strings.TrimSpace(l)
		if !strings.HasPrefix(l, "loop next proj") {
			continue
		}
		n++
		args := append([]string{"next", proj}, strings.Fields(strings.TrimPrefix(l, "loop next proj"))...)
		for i, a := range args {
			if i > 0 && args[i-1] == "--out" {
				args[i] = filepath.Join(dir, a)
			}
		}
		code, _, errs := loop(t, args...)
		if code == 2 || !strings.Contains(l, "--audit") && !strings.Contains(l, "--below-threshold") && code != 0 {
			t.Errorf("next --help example %q: exit %d: %s", l, code, errs)
		}
	}
	if n < 3 {
		t.Errorf("next --help has %d examples", n)
	}
}
