package autolabel

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/runners/prism"
	"github.com/parquet-go/parquet-go"

	"handoff"
	"handoff/features"
	"handoff/learner"
)

// record is one line of testdata/pkgdesc.jsonl: a Debian 12 package
// description and its archive section (source in testdata/README.md).
type record struct {
	ID      string `json:"id"`
	Text    string `json:"text"`
	Section string `json:"section"`
}

func readPkgdesc(t *testing.T) []record {
	t.Helper()
	f, err := os.Open("../../testdata/pkgdesc.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var recs []record
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r record
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			t.Fatal(err)
		}
		recs = append(recs, r)
	}
	return recs
}

// archive returns n text items: the real descriptions first, then new texts
// made by joining two of them (so every item differs and confidences
// spread), with a parent and a covariate on some.
func archive(recs []record, n int) []handoff.Item {
	items := make([]handoff.Item, 0, n)
	for i := 0; len(items) < n; i++ {
		a := recs[i%len(recs)]
		it := handoff.Item{ID: fmt.Sprintf("a%05d", i), Kind: handoff.KindText, Text: a.Text}
		if i >= len(recs) {
			b := recs[(i*7+i/len(recs))%len(recs)]
			it.Text = a.Text + "; " + b.Text
		}
		if i%3 == 0 {
			it.Parent = a.ID
			it.Covariates = map[string]string{"batch": fmt.Sprint(i % 5)}
		}
		items = append(items, it)
	}
	return items
}

// writeItems writes items as JSONL item records, as `loop items add` reads
// them, split over files.
func writeItems(t *testing.T, dir string, items []handoff.Item, files int) {
	t.Helper()
	for f := range files {
		var b strings.Builder
		for i := f; i < len(items); i += files {
			it := items[i]
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
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("items-%d.jsonl", f)), []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

// trainModel fits a machine on the package descriptions (word 1–2-gram
// TF-IDF, logistic regression) and writes it as learner.WriteMachine does
// for `loop model export`.
func trainModel(t *testing.T, recs []record, path string, threshold float64) *learner.Machine {
	t.Helper()
	var keys []string
	for _, r := range recs {
		if !slices.Contains(keys, r.Section) {
			keys = append(keys, r.Section)
		}
	}
	slices.Sort(keys)
	texts := make([]string, len(recs))
	targets := make([][]float64, len(recs))
	for i, r := range recs {
		texts[i] = r.Text
		targets[i] = make([]float64, len(keys))
		targets[i][slices.Index(keys, r.Section)] = 1
	}
	vec, err := features.DefaultTextConfig().Fit(texts)
	if err != nil {
		t.Fatal(err)
	}
	mod, err := learner.Logistic{Lambda: 0.1, MaxIter: 100}.Fit(vec.Transform(texts), targets, nil)
	if err != nil {
		t.Fatal(err)
	}
	present := make([]int, len(keys))
	for i := range present {
		present[i] = i
	}
	m := &learner.Machine{Kind: handoff.KindText, Learner: "logistic", Classes: keys, Present: present,
		Temperature: 1.3, Text: vec, Model: mod, Name: "test-v1", Cutoff: threshold}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := learner.WriteMachine(f, m); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	back, err := learner.LoadMachine(path)
	if err != nil {
		t.Fatal(err)
	}
	return back
}

func readJSONL[T any](t *testing.T, pattern string) []T {
	t.Helper()
	files, _ := filepath.Glob(pattern)
	var out []T
	for _, p := range files {
		f, err := os.Open(p)
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		sc.Buffer(nil, 1<<20)
		for sc.Scan() {
			var v T
			if err := json.Unmarshal(sc.Bytes(), &v); err != nil {
				t.Fatalf("%s: %v", p, err)
			}
			out = append(out, v)
		}
		f.Close()
	}
	return out
}

func readParquet[T any](t *testing.T, pattern string) []T {
	t.Helper()
	files, _ := filepath.Glob(pattern)
	var out []T
	for _, p := range files {
		rows, err := parquet.ReadFile[T](p)
		if err != nil {
			t.Fatalf("%s: %v", p, err)
		}
		out = append(out, rows...)
	}
	return out
}

// peopleJSON is the JSONL form of ForPeople read back.
type peopleJSON struct {
	ID         string  `json:"id"`
	Text       string  `json:"text"`
	Parent     string  `json:"parent"`
	Batch      string  `json:"batch"`
	Class      string  `json:"machine_class"`
	Confidence float64 `json:"machine_confidence"`
	Model      string  `json:"model"`
}

func runPrism(t *testing.T, cfg Config) {
	t.Helper()
	ctx := context.Background()
	p, s := beam.NewPipelineWithRoot()
	if err := Build(ctx, s, cfg); err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	if _, err := prism.Execute(ctx, p); err != nil {
		t.Fatal(err)
	}
	t.Logf("prism run: %v", time.Since(start))
}

// TestPrismMatchesSingleProcess runs the pipeline on Prism over 10,500 items
// and checks every label and confidence, item for item, against
// learner.Machine.Label over all items in one call — the code `loop
// autolabel` runs — with the same model file.
func TestPrismMatchesSingleProcess(t *testing.T) {
	dir := t.TempDir()
	recs := readPkgdesc(t)
	items := archive(recs, 10500)
	writeItems(t, dir, items, 3)
	const thr = 0.6
	m := trainModel(t, recs, filepath.Join(dir, "model.gz"), thr)
	want, err := m.Label(items)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out")
	if err := os.MkdirAll(out, 0o755); err != nil {
		t.Fatal(err)
	}
	// Batch 700 does not divide the item count: the last batch of each
	// bundle is a partial one, flushed in FinishBundle.
	runPrism(t, Config{Items: filepath.Join(dir, "items-*.jsonl"), Model: filepath.Join(dir, "model.gz"),
		Out: out, Shards: 3, Batch: 700, Parquet: true})

	labels := readJSONL[Label](t, filepath.Join(out, "labels-*.jsonl"))
	people := readJSONL[peopleJSON](t, filepath.Join(out, "people-*.jsonl"))
	if len(labels)+len(people) != len(items) {
		t.Fatalf("%d labels + %d for people, want %d items", len(labels), len(people), len(items))
	}
	if len(labels) < len(items)/10 || len(people) < len(items)/10 {
		t.Fatalf("threshold %v split %d labels / %d for people: the test needs both sides", thr, len(labels), len(people))
	}
	byID := map[string]handoff.MachineLabel{}
	for _, w := range want {
		byID[w.Item] = w
	}
	itemByID := map[string]handoff.Item{}
	for _, it := range items {
		itemByID[it.ID] = it
	}
	seen := map[string]bool{}
	for _, l := range labels {
		w, ok := byID[l.Item]
		if !ok || seen[l.Item] {
			t.Fatalf("label for unknown or repeated item %q", l.Item)
		}
		seen[l.Item] = true
		if l.Class != w.Class || l.Confidence != w.Confidence || l.Model != "test-v1" {
			t.Fatalf("item %s: pipeline %s %.17g %s, single process %s %.17g", l.Item, l.Class, l.Confidence, l.Model, w.Class, w.Confidence)
		}
		if l.Confidence < thr {
			t.Fatalf("item %s labelled with confidence %v below the threshold %v", l.Item, l.Confidence, thr)
		}
	}
	for _, p := range people {
		w, ok := byID[p.ID]
		if !ok || seen[p.ID] {
			t.Fatalf("item for people unknown or repeated: %q", p.ID)
		}
		seen[p.ID] = true
		if p.Class != w.Class || p.Confidence != w.Confidence || p.Confidence >= thr {
			t.Fatalf("item %s for people: pipeline %s %.17g, single process %s %.17g (threshold %v)", p.ID, p.Class, p.Confidence, w.Class, w.Confidence, thr)
		}
		it := itemByID[p.ID]
		if p.Text != it.Text || p.Parent != it.Parent || p.Batch != it.Covariates["batch"] {
			t.Fatalf("item %s for people does not carry the item as read: %+v vs %+v", p.ID, p, it)
		}
	}

	// The Parquet shards hold the same rows as the JSONL shards.
	pl := readParquet[Label](t, filepath.Join(out, "labels-*.parquet"))
	pp := readParquet[ForPeople](t, filepath.Join(out, "people-*.parquet"))
	if !slices.Equal(pl, labels) {
		t.Fatalf("Parquet labels differ from JSONL labels (%d vs %d rows)", len(pl), len(labels))
	}
	if len(pp) != len(people) {
		t.Fatalf("Parquet people %d rows, JSONL %d", len(pp), len(people))
	}
	for i := range pp {
		if pp[i].ID != people[i].ID || pp[i].Confidence != people[i].Confidence || pp[i].Covariates["batch"] != people[i].Batch {
			t.Fatalf("Parquet people row %d differs: %+v vs %+v", i, pp[i], people[i])
		}
	}
	// Shard files are named i-of-n and every item sits in the shard its id
	// hashes to.
	for sh := range 3 {
		for _, l := range readJSONL[Label](t, filepath.Join(out, ShardName("labels", sh, 3, "jsonl"))) {
			if shardOf(l.Item, 3) != sh {
				t.Fatalf("item %s in labels shard %d, hashes to %d", l.Item, sh, shardOf(l.Item, 3))
			}
		}
	}
}

// TestBadInput checks that bad configurations and records fail with an
// error that names the problem.
func TestBadInput(t *testing.T) {
	dir := t.TempDir()
	recs := readPkgdesc(t)
	model := filepath.Join(dir, "model.gz")
	trainModel(t, recs[:400], model, 0)
	ctx := context.Background()
	for _, tc := range []struct {
		name string
		cfg  Config
		want string
	}{
		{"no items", Config{Model: model, Out: dir, Threshold: 0.5}, "no items"},
		{"no model", Config{Items: "x", Out: dir}, "no model"},
		{"missing model", Config{Items: "x", Model: filepath.Join(dir, "nope.gz"), Out: dir}, "nope.gz"},
		{"not a model", Config{Items: "x", Model: "../../testdata/pkgdesc.jsonl", Out: dir}, "not a model file"},
		{"no threshold", Config{Items: "x", Model: model, Out: dir}, "records no autolabel threshold"},
		{"bad threshold", Config{Items: "x", Model: model, Out: dir, Threshold: 1.5}, "not between 0 and 1"},
		{"bad shards", Config{Items: "x", Model: model, Out: dir, Shards: -1}, "at least 1"},
	} {
		_, s := beam.NewPipelineWithRoot()
		err := Build(ctx, s, tc.cfg)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: got %v, want an error containing %q", tc.name, err, tc.want)
		}
	}

	// A record without text fails the run, naming the file and the record.
	bad := filepath.Join(dir, "bad.jsonl")
	os.WriteFile(bad, []byte("{\"id\":\"ok\",\"text\":\"a library\"}\n{\"id\":\"x7\",\"body\":\"no text field\"}\n"), 0o644)
	p, s := beam.NewPipelineWithRoot()
	if err := Build(ctx, s, Config{Items: bad, Model: model, Out: dir, Threshold: 0.5}); err != nil {
		t.Fatal(err)
	}
	_, err := prism.Execute(ctx, p)
	if err == nil || !strings.Contains(err.Error(), "bad.jsonl") || !strings.Contains(err.Error(), "x7") {
		t.Fatalf("got %v, want an error naming bad.jsonl and record x7", err)
	}
}
