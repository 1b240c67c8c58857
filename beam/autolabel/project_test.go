package autolabel

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"

	"handoff"
)

// record is one line of testdata/pkgdesc.jsonl: a Debian 12 package
// description and its archive section (source in testdata/README.md).
type record struct {
	ID      string `json:"id"`
	Text    string `json:"text"`
	Section string `json:"section"`
}

func pkgdesc(path string) ([]record, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var recs []record
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r record
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		recs = append(recs, r)
	}
	return recs, sc.Err()
}

// archive returns n text items made by joining two package descriptions
// (so every item differs and confidences spread), with a parent and a
// covariate on every third.
func archive(recs []record, n int) []handoff.Item {
	items := make([]handoff.Item, 0, n)
	for i := range n {
		a, b := recs[i%len(recs)], recs[(i*7+i/len(recs))%len(recs)]
		it := handoff.Item{ID: fmt.Sprintf("a%05d", i), Kind: handoff.KindText, Text: a.Text + "; " + b.Text}
		if i%3 == 0 {
			it.Parent = a.ID
			it.Covariates = map[string]string{"batch": fmt.Sprint(i % 5)}
		}
		items = append(items, it)
	}
	return items
}

// itemsJSONL renders items as JSONL item records, as `loop items add`
// reads them (covariates as top-level fields).
func itemsJSONL(items []handoff.Item) string {
	var b strings.Builder
	for _, it := range items {
		m := map[string]any{"id": it.ID, "text": it.Text}
		if it.Parent != "" {
			m["parent"] = it.Parent
		}
		for k, v := range it.Covariates {
			m[k] = v
		}
		line, _ := json.Marshal(m)
		b.Write(line)
		b.WriteByte('\n')
	}
	return b.String()
}

// project is a small project made with the main module's `loop` command:
// the 2,210 package descriptions labelled with their sections by one
// annotator, an archive of 10,000 unlabelled items, one round, `loop
// autolabel --force` at testThreshold, the model exported with `loop model
// export` and every item exported with `loop export --format jsonl`.
type project struct {
	dir     string
	archive string // the archive's JSONL items (what the pipeline reads)
	items   []handoff.Item
	model   string // written by `loop model export`
	export  string // written by `loop export --format jsonl`
}

const testThreshold = 0.6

var (
	projOnce sync.Once
	proj     project
	projErr  error
)

// loopProject makes the project once per test binary; TestMain removes it.
func loopProject(t *testing.T) project {
	t.Helper()
	projOnce.Do(func() { proj, projErr = makeProject() })
	if projErr != nil {
		t.Fatal(projErr)
	}
	return proj
}

func makeProject() (project, error) {
	dir, err := os.MkdirTemp("", "beam-autolabel-test")
	if err != nil {
		return project{}, err
	}
	tempDirs = append(tempDirs, dir)
	root, err := filepath.Abs("../..")
	if err != nil {
		return project{}, err
	}
	loop := filepath.Join(dir, "loop")
	build := exec.Command("go", "build", "-o", loop, "./cmd/loop")
	build.Dir = root
	if out, err := build.CombinedOutput(); err != nil {
		return project{}, fmt.Errorf("building loop: %v\n%s", err, out)
	}
	recs, err := pkgdesc(filepath.Join(root, "testdata", "pkgdesc.jsonl"))
	if err != nil {
		return project{}, err
	}
	var keys []string
	for _, r := range recs {
		if !slices.Contains(keys, r.Section) {
			keys = append(keys, r.Section)
		}
	}
	slices.Sort(keys)
	var cb, train, labels strings.Builder
	cb.WriteString("name: section\nquestion: Which archive section does this package belong to?\nclasses:\n")
	for _, k := range keys {
		cb.WriteString("  - {key: " + k + "}\n")
	}
	labels.WriteString("item,annotator,label\n")
	var tr []handoff.Item
	for _, r := range recs {
		tr = append(tr, handoff.Item{ID: "t-" + r.ID, Text: r.Text})
		fmt.Fprintf(&labels, "t-%s,a1,%s\n", r.ID, r.Section)
	}
	train.WriteString(itemsJSONL(tr))
	p := project{dir: dir, archive: filepath.Join(dir, "archive.jsonl"), model: filepath.Join(dir, "model.hom"),
		export: filepath.Join(dir, "export.jsonl"), items: archive(recs, 10000)}
	for name, body := range map[string]string{"cb.yaml": cb.String(), "train.jsonl": train.String(),
		"labels.csv": labels.String(), "archive.jsonl": itemsJSONL(p.items)} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(body), 0o644); err != nil {
			return project{}, err
		}
	}
	pd := filepath.Join(dir, "proj")
	for _, args := range [][]string{
		{"init", pd, "--codebook", filepath.Join(dir, "cb.yaml")},
		{"items", "add", pd, filepath.Join(dir, "train.jsonl"), p.archive},
		{"labels", "add", pd, filepath.Join(dir, "labels.csv")},
		{"consensus", pd},
		{"round", pd},
		{"autolabel", pd, "--force", "--threshold", fmt.Sprint(testThreshold)},
		{"model", "export", pd, p.model},
		{"export", pd, "--format", "jsonl", "--out", p.export},
	} {
		cmd := exec.Command(loop, args...)
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			return project{}, fmt.Errorf("loop %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	return p, nil
}
