package demo

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestRunReproducible: two runs of the demo with the same seed write
// identical exports and the same account of what happened; a different
// seed changes the export. Each run is the small scenario's reports
// project, two rounds at most.
func TestRunReproducible(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo three times")
	}
	base := t.TempDir()
	var exports [][]byte
	var logs []string
	for i, seed := range []uint64{3, 3, 4} {
		dir := filepath.Join(base, string(rune('a'+i)))
		var out bytes.Buffer
		if err := Run(Config{Dir: dir, Seed: seed, Rounds: 2, Only: "reports", Small: true, Source: "test"}, &out); err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(dir, "reports", "export.csv"))
		if err != nil {
			t.Fatal(err)
		}
		if _, err := os.Stat(filepath.Join(dir, "reports", "report.html")); err != nil {
			t.Error(err)
		}
		exports = append(exports, b)
		logs = append(logs, strings.ReplaceAll(out.String(), dir, "DIR"))
	}
	if !bytes.Equal(exports[0], exports[1]) {
		t.Error("two demo runs with the same seed wrote different exports")
	}
	if logs[0] != logs[1] {
		t.Errorf("two demo runs with the same seed told different stories:\n%s\n---\n%s", logs[0], logs[1])
	}
	if bytes.Equal(exports[0], exports[2]) {
		t.Error("a different seed wrote the same export")
	}
	for _, want := range []string{"reports: ", "  round 1: trained on ", "  exported ", "\nreports:   round "} {
		if !strings.Contains(logs[0], want) {
			t.Errorf("the demo's account has no %q:\n%s", want, logs[0])
		}
	}
}

// TestRunRefuses: a folder that is not empty, and a project the demo does
// not have, are refused before anything is written.
func TestRunRefuses(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "keep.txt"), []byte("mine"), 0o644); err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name string
		cfg  Config
		want string
	}{
		{"not empty", Config{Dir: dir}, "not empty"},
		{"unknown project", Config{Dir: filepath.Join(dir, "new"), Only: "photos"}, "no project"},
	}
	for _, c := range cases {
		err := Run(c.cfg, &bytes.Buffer{})
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want an error saying %q", c.name, err, c.want)
		}
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("the refused runs wrote %d entries into %s", len(entries)-1, dir)
	}
}
