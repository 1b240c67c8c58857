// Command bench measures bulk autolabel throughput: the Beam pipeline on
// the embedded Prism runner against the single-process path (one call of
// learner.Machine.Label over every item, as `loop autolabel` scores), on
// the same generated items and model. bench/beam/run.sh drives it; each
// mode prints one JSON object.
//
//	bench gen    -dir D -n 1000000 -pkgdesc ../testdata/pkgdesc.jsonl -loop bin/loop
//	bench single -dir D
//	bench prism  -dir D [-batch 1000] [-parquet]
//	bench report -runs runs.jsonl -features ../bench/features/RESULTS.md > RESULTS.md
//
// Run each measurement in its own process with GOMAXPROCS set: that is the
// number of cores the worker may use.
package main

import (
	"bufio"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"log"
	"log/slog"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"runtime/pprof"
	"slices"
	"strings"
	"syscall"
	"time"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/runners/prism"

	"handoff"
	"handoff/beam/autolabel"
	"handoff/ingest"
	"handoff/learner"
)

const threshold = 0.6

func main() {
	if len(os.Args) < 2 {
		log.Fatal("usage: bench gen|single|prism [flags]")
	}
	mode := os.Args[1]
	fs := flag.NewFlagSet(mode, flag.ExitOnError)
	dir := fs.String("dir", "", "working folder (items-*.jsonl, model.hom, outputs)")
	n := fs.Int("n", 1_000_000, "gen: number of items")
	files := fs.Int("files", 4, "gen: number of item files")
	pkgdesc := fs.String("pkgdesc", "../testdata/pkgdesc.jsonl", "gen: training texts with sections")
	loopBin := fs.String("loop", "loop", "gen: the loop binary that trains and exports the model")
	batch := fs.Int("batch", 1000, "prism: items per scoring call")
	shards := fs.Int("shards", 4, "prism: output shards")
	pq := fs.Bool("parquet", false, "prism: also write Parquet")
	prof := fs.String("cpuprofile", "", "write a CPU profile to this file")
	runsPath := fs.String("runs", "", "report: file of runs, one JSON object per line")
	featPath := fs.String("features", "../bench/features/RESULTS.md", "report: the features benchmark's results")
	load := fs.String("load", "", "report: load average to print")
	fs.Parse(os.Args[2:])
	if *prof != "" {
		pf, err := os.Create(*prof)
		if err != nil {
			log.Fatal(err)
		}
		pprof.StartCPUProfile(pf)
		defer pprof.StopCPUProfile()
	}
	// Beam reads its own flags from the command line; give it none.
	os.Args = os.Args[:1]
	flag.Parse()
	beam.Init()
	slog.SetLogLoggerLevel(slog.LevelWarn)
	if mode == "report" {
		report(*runsPath, *featPath, *load)
		return
	}
	if *dir == "" {
		log.Fatal("bench: -dir is required")
	}
	switch mode {
	case "gen":
		gen(*dir, *n, *files, *pkgdesc, *loopBin)
	case "single":
		single(*dir)
	case "prism":
		runPrism(*dir, *batch, *shards, *pq)
	default:
		log.Fatalf("bench: unknown mode %q", mode)
	}
}

type record struct {
	ID      string `json:"id"`
	Text    string `json:"text"`
	Section string `json:"section"`
}

// gen writes n short text items over files JSONL files — the package
// descriptions, then joins of two of them — and model.hom, trained on the
// descriptions' sections by `loop round` and written by `loop model export`.
func gen(dir string, n, files int, pkgdesc, loop string) {
	f, err := os.Open(pkgdesc)
	if err != nil {
		log.Fatal(err)
	}
	var recs []record
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r record
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			log.Fatal(err)
		}
		recs = append(recs, r)
	}
	f.Close()
	ws := make([]*bufio.Writer, files)
	for i := range ws {
		f, err := os.Create(filepath.Join(dir, fmt.Sprintf("items-%d.jsonl", i)))
		if err != nil {
			log.Fatal(err)
		}
		defer f.Close()
		ws[i] = bufio.NewWriterSize(f, 1<<20)
		defer ws[i].Flush()
	}
	var bytes int
	for i := range n {
		a := recs[i%len(recs)]
		text := a.Text
		if i >= len(recs) {
			text += "; " + recs[(i*7+i/len(recs))%len(recs)].Text
		}
		line, _ := json.Marshal(map[string]string{"id": fmt.Sprintf("i%07d", i), "text": text})
		bytes += len(line) + 1
		ws[i%files].Write(line)
		ws[i%files].WriteByte('\n')
	}
	if err := loopModel(dir, recs, loop); err != nil {
		log.Fatal(err)
	}
	emit(map[string]any{"mode": "gen", "items": n, "files": files, "mean_bytes_per_item": float64(bytes) / float64(n)})
}

// loopModel makes a project of the labelled descriptions with the loop
// command, runs one round and exports its model to dir/model.hom.
func loopModel(dir string, recs []record, loop string) error {
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
	for _, r := range recs {
		line, _ := json.Marshal(map[string]string{"id": "t-" + r.ID, "text": r.Text})
		train.Write(line)
		train.WriteByte('\n')
		fmt.Fprintf(&labels, "t-%s,a1,%s\n", r.ID, r.Section)
	}
	tmp := filepath.Join(dir, "train")
	if err := os.MkdirAll(tmp, 0o755); err != nil {
		return err
	}
	for name, body := range map[string]string{"cb.yaml": cb.String(), "train.jsonl": train.String(), "labels.csv": labels.String()} {
		if err := os.WriteFile(filepath.Join(tmp, name), []byte(body), 0o644); err != nil {
			return err
		}
	}
	pd := filepath.Join(tmp, "proj")
	for _, args := range [][]string{
		{"init", pd, "--codebook", filepath.Join(tmp, "cb.yaml")},
		{"items", "add", pd, filepath.Join(tmp, "train.jsonl")},
		{"labels", "add", pd, filepath.Join(tmp, "labels.csv")},
		{"consensus", pd},
		{"round", pd},
		{"model", "export", pd, filepath.Join(dir, "model.hom")},
	} {
		if out, err := exec.Command(loop, args...).CombinedOutput(); err != nil {
			return fmt.Errorf("loop %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	return nil
}

func cpuSeconds() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()).Seconds()
}

func emit(v map[string]any) {
	v["gomaxprocs"] = runtime.GOMAXPROCS(0)
	b, _ := json.Marshal(v)
	fmt.Println(string(b))
}

// single reads every item with package ingest (the reader `loop items
// add` uses), scores them all with one Machine.Label call, splits at the
// threshold and writes labels.jsonl and people.jsonl: the same work as the
// pipeline without the runner.
func single(dir string) {
	t0, c0 := time.Now(), cpuSeconds()
	m, err := learner.LoadMachine(filepath.Join(dir, "model.hom"))
	if err != nil {
		log.Fatal(err)
	}
	paths, _ := filepath.Glob(filepath.Join(dir, "items-*.jsonl"))
	var items []handoff.Item
	for _, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			log.Fatal(err)
		}
		r, err := ingest.NewItemReader(f, p, ingest.JSONL, ingest.ItemOptions{})
		if err != nil {
			log.Fatal(err)
		}
		for {
			it, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				log.Fatal(err)
			}
			items = append(items, it)
		}
		f.Close()
	}
	tRead := time.Since(t0)
	ml, err := m.Label(items)
	if err != nil {
		log.Fatal(err)
	}
	tScore := time.Since(t0) - tRead
	out := filepath.Join(dir, "single")
	os.MkdirAll(out, 0o755)
	lf, _ := os.Create(filepath.Join(out, "labels.jsonl"))
	pf, _ := os.Create(filepath.Join(out, "people.jsonl"))
	lw, pw := bufio.NewWriterSize(lf, 1<<20), bufio.NewWriterSize(pf, 1<<20)
	le, pe := json.NewEncoder(lw), json.NewEncoder(pw)
	var nl int
	for i, l := range ml {
		if l.Confidence >= threshold {
			le.Encode(autolabel.Label{Item: l.Item, Class: l.Class, Confidence: l.Confidence, Model: l.Model})
			nl++
			continue
		}
		it := items[i]
		pe.Encode(autolabel.ForPeople{ID: it.ID, Kind: string(it.Kind), Text: it.Text, Parent: it.Parent,
			Position: int64(it.Position), Covariates: it.Covariates, Class: l.Class, Confidence: l.Confidence, Model: l.Model})
	}
	lw.Flush()
	pw.Flush()
	lf.Close()
	pf.Close()
	sec, cpu := time.Since(t0).Seconds(), cpuSeconds()-c0
	emit(map[string]any{"mode": "single", "items": len(items), "labelled": nl, "seconds": sec, "cpu_seconds": cpu,
		"read_seconds": tRead.Seconds(), "score_seconds": tScore.Seconds(),
		"items_per_s": float64(len(items)) / sec})
}

// runPrism runs the autolabel pipeline on the embedded Prism runner.
func runPrism(dir string, batch, shards int, pq bool) {
	out := filepath.Join(dir, "prism")
	os.MkdirAll(out, 0o755)
	ctx := context.Background()
	t0, c0 := time.Now(), cpuSeconds()
	p, s := beam.NewPipelineWithRoot()
	if _, err := autolabel.Build(ctx, s, autolabel.Config{Items: filepath.Join(dir, "items-*.jsonl"),
		Model: filepath.Join(dir, "model.hom"), Threshold: threshold, Out: out, Shards: shards, Batch: batch, Parquet: pq}); err != nil {
		log.Fatal(err)
	}
	res, err := prism.Execute(ctx, p)
	if err != nil {
		log.Fatal(err)
	}
	sec, cpu := time.Since(t0).Seconds(), cpuSeconds()-c0
	counts := map[string]int64{}
	for _, c := range res.Metrics().AllMetrics().Counters() {
		counts[c.Key.Name] = c.Committed
	}
	emit(map[string]any{"mode": "prism", "items": counts["items"], "labelled": counts["labelled"], "batch": batch,
		"parquet": pq, "seconds": sec, "cpu_seconds": cpu, "items_per_s": float64(counts["items"]) / sec})
}
