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
	"handoff/learner"
)

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

// exportRow is the part of a `loop export --format jsonl` row compared.
type exportRow struct {
	Item       string  `json:"item"`
	Class      string  `json:"class"`
	Source     string  `json:"source"`
	Confidence float64 `json:"confidence"`
	Model      string  `json:"model"`
}

func runPrism(t *testing.T, cfg Config) {
	t.Helper()
	ctx := context.Background()
	p, s := beam.NewPipelineWithRoot()
	if _, err := Build(ctx, s, cfg); err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	if _, err := prism.Execute(ctx, p); err != nil {
		t.Fatal(err)
	}
	t.Logf("prism run: %v", time.Since(start))
}

// TestPrismMatchesLoopAutolabel runs the pipeline on Prism over the 10,000
// archive items of a project made with `loop` and checks, item for item,
// that the machine labels (class, confidence, model version) are exactly
// those `loop autolabel` stored (read back with `loop export`), that the
// items left for people are exactly those it left, and that every
// confidence equals learner.Machine.Label's over all items in one call
// with the exported model file.
func TestPrismMatchesLoopAutolabel(t *testing.T) {
	pr := loopProject(t)
	out := t.TempDir()
	// Batch 700 does not divide the item count: the last batch of each
	// bundle is a partial one, flushed in FinishBundle.
	runPrism(t, Config{Items: pr.archive, Model: pr.model, Threshold: testThreshold,
		Out: out, Shards: 3, Batch: 700, Parquet: true})

	labels := readJSONL[Label](t, filepath.Join(out, "labels-*.jsonl"))
	people := readJSONL[peopleJSON](t, filepath.Join(out, "people-*.jsonl"))
	if len(labels)+len(people) != len(pr.items) {
		t.Fatalf("%d labels + %d for people, want %d items", len(labels), len(people), len(pr.items))
	}
	if len(labels) < len(pr.items)/10 || len(people) < len(pr.items)/10 {
		t.Fatalf("threshold %v split %d labels / %d for people: the test needs both sides", testThreshold, len(labels), len(people))
	}
	t.Logf("%d machine labels, %d items for people", len(labels), len(people))

	// Against `loop autolabel`, through `loop export`.
	loopRows := map[string]exportRow{}
	for _, r := range readJSONL[exportRow](t, pr.export) {
		loopRows[r.Item] = r
	}
	seen := map[string]bool{}
	for _, l := range labels {
		r, ok := loopRows[l.Item]
		if !ok || seen[l.Item] {
			t.Fatalf("label for unknown or repeated item %q", l.Item)
		}
		seen[l.Item] = true
		if r.Source != "machine" || l.Class != r.Class || l.Confidence != r.Confidence || l.Model != r.Model {
			t.Fatalf("item %s: pipeline %s %.17g %s, loop autolabel %q %s %.17g %s",
				l.Item, l.Class, l.Confidence, l.Model, r.Source, r.Class, r.Confidence, r.Model)
		}
	}
	for _, p := range people {
		r, ok := loopRows[p.ID]
		if !ok || seen[p.ID] {
			t.Fatalf("item for people unknown or repeated: %q", p.ID)
		}
		seen[p.ID] = true
		if r.Source != "" {
			t.Fatalf("item %s left for people by the pipeline, but loop gave it a %s label", p.ID, r.Source)
		}
	}
	nMachine := 0
	for _, r := range loopRows {
		if r.Source == "machine" {
			nMachine++
		}
	}
	if nMachine != len(labels) {
		t.Fatalf("loop autolabel wrote %d machine labels, the pipeline %d", nMachine, len(labels))
	}

	// Against Machine.Label over all items at once, for both outputs.
	m, err := learner.LoadMachine(pr.model)
	if err != nil {
		t.Fatal(err)
	}
	want, err := m.Label(pr.items)
	if err != nil {
		t.Fatal(err)
	}
	byID := map[string]handoff.MachineLabel{}
	for _, w := range want {
		byID[w.Item] = w
	}
	itemByID := map[string]handoff.Item{}
	for _, it := range pr.items {
		itemByID[it.ID] = it
	}
	for _, l := range labels {
		if w := byID[l.Item]; l.Class != w.Class || l.Confidence != w.Confidence || l.Confidence < testThreshold {
			t.Fatalf("item %s: pipeline %s %.17g, Machine.Label %s %.17g", l.Item, l.Class, l.Confidence, w.Class, w.Confidence)
		}
	}
	for _, p := range people {
		w := byID[p.ID]
		if p.Class != w.Class || p.Confidence != w.Confidence || p.Confidence >= testThreshold || p.Model != m.Version() {
			t.Fatalf("item %s for people: pipeline %s %.17g, Machine.Label %s %.17g (threshold %v)", p.ID, p.Class, p.Confidence, w.Class, w.Confidence, testThreshold)
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
	// Shards are named i-of-n, sorted by id, and every item sits in the
	// shard its id hashes to.
	for sh := range 3 {
		rows := readJSONL[Label](t, filepath.Join(out, ShardName("labels", sh, 3, "jsonl")))
		if len(rows) == 0 || !slices.IsSortedFunc(rows, func(a, b Label) int { return strings.Compare(a.Item, b.Item) }) {
			t.Fatalf("labels shard %d: %d rows, sorted %v", sh, len(rows), len(rows) > 0)
		}
		for _, l := range rows {
			if shardOf(l.Item, 3) != sh {
				t.Fatalf("item %s in labels shard %d, hashes to %d", l.Item, sh, shardOf(l.Item, 3))
			}
		}
	}
}

// TestBadInput checks that bad configurations and records fail with an
// error that names the problem.
func TestBadInput(t *testing.T) {
	pr := loopProject(t) // its model has no threshold: the verdict was NOT YET
	dir := t.TempDir()
	ctx := context.Background()
	for _, tc := range []struct {
		name string
		cfg  Config
		want string
	}{
		{"no items", Config{Model: pr.model, Out: dir, Threshold: 0.5}, "no items"},
		{"no model", Config{Items: "x", Out: dir}, "no model"},
		{"no output", Config{Items: "x", Model: pr.model}, "no output"},
		{"missing model", Config{Items: "x", Model: filepath.Join(dir, "nope.hom"), Out: dir}, "nope.hom"},
		{"not a model", Config{Items: "x", Model: pr.archive, Out: dir}, "not a model file"},
		{"no threshold", Config{Items: "x", Model: pr.model, Out: dir}, "records no autolabel threshold"},
		{"bad threshold", Config{Items: "x", Model: pr.model, Out: dir, Threshold: 1.5}, "not between 0 and 1"},
		{"bad shards", Config{Items: "x", Model: pr.model, Out: dir, Shards: -1}, "at least 1"},
	} {
		_, s := beam.NewPipelineWithRoot()
		_, err := Build(ctx, s, tc.cfg)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: got %v, want an error containing %q", tc.name, err, tc.want)
		}
	}

	// A record without text fails the run, naming the file and the record.
	bad := filepath.Join(dir, "bad.jsonl")
	os.WriteFile(bad, []byte("{\"id\":\"ok\",\"text\":\"a library\"}\n{\"id\":\"x7\",\"body\":\"no text field\"}\n"), 0o644)
	p, s := beam.NewPipelineWithRoot()
	if _, err := Build(ctx, s, Config{Items: bad, Model: pr.model, Out: dir, Threshold: 0.5}); err != nil {
		t.Fatal(err)
	}
	_, err := prism.Execute(ctx, p)
	if err == nil || !strings.Contains(err.Error(), "bad.jsonl") || !strings.Contains(err.Error(), "x7") || !strings.Contains(err.Error(), "missing text") {
		t.Fatalf("got %v, want an error naming bad.jsonl, record x7 and the missing text", err)
	}
}

func TestResolve(t *testing.T) {
	for _, tc := range []struct{ list, p, want string }{
		{"/data/lists/a.txt", "img/x.png", "/data/lists/img/x.png"},
		{"/data/lists/a.txt", "../img/x.png", "/data/img/x.png"},
		{"/data/lists/a.txt", "/abs/x.png", "/abs/x.png"},
		{"a.txt", "img/x.png", "img/x.png"},
		{"gs://bucket/lists/a.txt", "img/x.png", "gs://bucket/lists/img/x.png"},
		{"gs://bucket/lists/a.txt", "gs://other/x.png", "gs://other/x.png"},
	} {
		if got := resolve(tc.list, tc.p); got != tc.want {
			t.Errorf("resolve(%q, %q) = %q, want %q", tc.list, tc.p, got, tc.want)
		}
	}
}

func TestShardName(t *testing.T) {
	if got := ShardName("labels", 3, 16, "parquet"); got != "labels-00003-of-00016.parquet" {
		t.Errorf("ShardName = %q", got)
	}
	// Every shard index is reached and the hash is stable.
	seen := map[int]bool{}
	for i := range 200 {
		seen[shardOf(fmt.Sprintf("item-%d", i), 7)] = true
	}
	if len(seen) != 7 || shardOf("abc", 7) != shardOf("abc", 7) {
		t.Errorf("shards reached: %v", seen)
	}
}
