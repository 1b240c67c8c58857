package autolabel

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"runtime"
	"strings"
	"sync"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/register"

	"handoff"
	"handoff/ingest"
	"handoff/learner"
)

func init() {
	register.DoFn5x1[context.Context, string, string, func(int, labelRows), func(int, peopleRows), error](&scoreFn{})
	register.Emitter2[int, labelRows]()
	register.Emitter2[int, peopleRows]()
	beam.RegisterType(typeOf[labelRows]())
	beam.RegisterType(typeOf[peopleRows]())
}

var (
	cItems  = beam.NewCounter("autolabel", "items")
	cLabels = beam.NewCounter("autolabel", "labelled")
	cPeople = beam.NewCounter("autolabel", "for_people")
)

// scoreFn parses lines into items, collects them into batches of Batch
// items within a bundle, scores each batch with one call to
// learner.Machine.Label, and emits the rows of each batch grouped by output
// shard: machine labels for confidence ≥ Threshold, items for people below.
type scoreFn struct {
	Model     string
	Threshold float64
	Images    bool
	Batch     int
	Shards    int

	m     *learner.Machine
	lines []string // JSONL records (text) or resolved paths (images)
	ids   []string // image ids (the path as written)
	files []string // the file each buffered line came from, for errors
}

// Setup loads the model once per worker process (shared by every
// instance of the DoFn in it).
func (f *scoreFn) Setup(ctx context.Context) error {
	m, err := loadModel(ctx, f.Model)
	if err != nil {
		return err
	}
	f.m = m
	return nil
}

func (f *scoreFn) StartBundle(ctx context.Context, _ func(int, labelRows), _ func(int, peopleRows)) {
	f.lines, f.ids, f.files = f.lines[:0], f.ids[:0], f.files[:0]
}

func (f *scoreFn) ProcessElement(ctx context.Context, file, line string, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	t := strings.TrimSpace(line)
	if t == "" {
		return nil
	}
	if f.Images {
		if strings.HasPrefix(t, "#") {
			return nil
		}
		f.ids = append(f.ids, t)
		t = resolve(file, t)
	}
	f.lines = append(f.lines, t)
	f.files = append(f.files, file)
	if len(f.lines) >= f.Batch {
		return f.flush(ctx, emitL, emitP)
	}
	return nil
}

func (f *scoreFn) FinishBundle(ctx context.Context, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	return f.flush(ctx, emitL, emitP)
}

// items turns the buffered lines into items. Text records are parsed by
// package ingest, the reader `loop items add` uses, so both accept and
// refuse the same records; the batch is cut into GOMAXPROCS parts parsed at
// once (as Machine.Label then featurises and scores on all cores).
func (f *scoreFn) items() ([]handoff.Item, error) {
	n := len(f.lines)
	items := make([]handoff.Item, n)
	if f.Images {
		for i, p := range f.lines {
			items[i] = handoff.Item{ID: f.ids[i], Kind: handoff.KindImage, Path: p}
		}
		return items, nil
	}
	parts := min(runtime.GOMAXPROCS(0), max(1, n/256))
	errs := make([]error, parts)
	var wg sync.WaitGroup
	for w := range parts {
		lo, hi := w*n/parts, (w+1)*n/parts
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[w] = f.parse(items[lo:hi], lo)
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return items, nil
}

// parse reads the records f.lines[lo:lo+len(dst)] into dst.
func (f *scoreFn) parse(dst []handoff.Item, lo int) error {
	var buf bytes.Buffer
	for _, l := range f.lines[lo : lo+len(dst)] {
		buf.WriteString(l)
		buf.WriteByte('\n')
	}
	r, err := ingest.NewItemReader(&buf, "batch", ingest.JSONL, ingest.ItemOptions{})
	if err != nil {
		return err
	}
	for i := range dst {
		it, err := r.Next()
		if err == io.EOF {
			return fmt.Errorf("autolabel: %s: read %d items from %d records", f.files[lo], i, len(dst))
		}
		if err != nil {
			// Name the source file and the record rather than the
			// line within the batch (textio does not keep line numbers).
			var ie *ingest.Error
			if errors.As(err, &ie) && ie.Line >= 1 && ie.Line <= len(dst) {
				at := lo + ie.Line - 1
				rec := f.lines[at]
				if len(rec) > 80 {
					rec = rec[:80] + "…"
				}
				if ie.Field != "" {
					return fmt.Errorf("%s: record %s: field %q: %w", f.files[at], rec, ie.Field, ie.Err)
				}
				return fmt.Errorf("%s: record %s: %w", f.files[at], rec, ie.Err)
			}
			return err
		}
		dst[i] = it
	}
	return nil
}

func (f *scoreFn) flush(ctx context.Context, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	if len(f.lines) == 0 {
		return nil
	}
	items, err := f.items()
	if err != nil {
		return err
	}
	ml, err := f.m.Label(items)
	if err != nil {
		return fmt.Errorf("autolabel: scoring %d items from %s: %w", len(items), f.files[0], err)
	}
	lab := make([][]Label, f.Shards)
	ppl := make([][]ForPeople, f.Shards)
	for i, l := range ml {
		it := &items[i]
		sh := shardOf(it.ID, f.Shards)
		if l.Confidence >= f.Threshold {
			lab[sh] = append(lab[sh], Label{Item: it.ID, Class: l.Class, Confidence: l.Confidence, Model: l.Model})
			continue
		}
		ppl[sh] = append(ppl[sh], ForPeople{
			ID: it.ID, Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent,
			Position: int64(it.Position), Covariates: it.Covariates,
			Class: l.Class, Confidence: l.Confidence, Model: l.Model,
		})
	}
	var nl, np int64
	for sh := range f.Shards {
		if len(lab[sh]) > 0 {
			emitL(sh, labelRows{Rows: lab[sh]})
			nl += int64(len(lab[sh]))
		}
		if len(ppl[sh]) > 0 {
			emitP(sh, peopleRows{Rows: ppl[sh]})
			np += int64(len(ppl[sh]))
		}
	}
	cItems.Inc(ctx, int64(len(items)))
	cLabels.Inc(ctx, nl)
	cPeople.Inc(ctx, np)
	f.lines, f.ids, f.files = f.lines[:0], f.ids[:0], f.files[:0]
	return nil
}
