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
//
// One batch is scored in the background while the next is read, so the
// reading (one goroutine) overlaps the parsing, featurising and scoring
// (all cores); rows are emitted from ProcessElement or FinishBundle, as
// Beam requires, in batch order.
type scoreFn struct {
	Model     string
	Threshold float64
	Images    bool
	Batch     int
	Shards    int

	m       *learner.Machine
	cur     *batch
	pending chan *scored // the batch in flight, nil if none
}

// batch is the lines buffered for one scoring call.
type batch struct {
	lines []string // JSONL records (text) or resolved paths (images)
	ids   []string // image ids (the path as written)
	files []string // the file each line came from, for errors
}

// scored is a batch's rows by output shard, or the error that stopped it.
type scored struct {
	lab    [][]Label
	ppl    [][]ForPeople
	n      int
	err    error
	reused *batch
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
	if f.cur == nil {
		f.cur = &batch{}
	}
	f.cur.reset()
	f.pending = nil
}

func (b *batch) reset() { b.lines, b.ids, b.files = b.lines[:0], b.ids[:0], b.files[:0] }

func (f *scoreFn) ProcessElement(ctx context.Context, file, line string, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	t := strings.TrimSpace(line)
	if t == "" {
		return nil
	}
	b := f.cur
	if f.Images {
		if strings.HasPrefix(t, "#") {
			return nil
		}
		b.ids = append(b.ids, t)
		t = resolve(file, t)
	}
	b.lines = append(b.lines, t)
	b.files = append(b.files, file)
	if len(b.lines) >= f.Batch {
		return f.flush(ctx, emitL, emitP)
	}
	return nil
}

func (f *scoreFn) FinishBundle(ctx context.Context, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	if err := f.flush(ctx, emitL, emitP); err != nil {
		return err
	}
	return f.drain(ctx, emitL, emitP)
}

// flush emits the batch in flight, if any, and starts scoring the current
// one in the background.
func (f *scoreFn) flush(ctx context.Context, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	if len(f.cur.lines) == 0 {
		return nil
	}
	next := &batch{}
	if f.pending != nil {
		s := <-f.pending
		f.pending = nil
		if err := f.emit(ctx, s, emitL, emitP); err != nil {
			return err
		}
		next = s.reused
		next.reset()
	}
	b := f.cur
	f.cur = next
	ch := make(chan *scored, 1)
	go func() { ch <- f.score(b) }()
	f.pending = ch
	return nil
}

// drain emits the batch in flight, if any.
func (f *scoreFn) drain(ctx context.Context, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	if f.pending == nil {
		return nil
	}
	s := <-f.pending
	f.pending = nil
	return f.emit(ctx, s, emitL, emitP)
}

func (f *scoreFn) emit(ctx context.Context, s *scored, emitL func(int, labelRows), emitP func(int, peopleRows)) error {
	if s.err != nil {
		return s.err
	}
	var nl, np int64
	for sh := range f.Shards {
		if len(s.lab[sh]) > 0 {
			emitL(sh, labelRows{Rows: s.lab[sh]})
			nl += int64(len(s.lab[sh]))
		}
		if len(s.ppl[sh]) > 0 {
			emitP(sh, peopleRows{Rows: s.ppl[sh]})
			np += int64(len(s.ppl[sh]))
		}
	}
	cItems.Inc(ctx, int64(s.n))
	cLabels.Inc(ctx, nl)
	cPeople.Inc(ctx, np)
	return nil
}

// score parses, featurises and scores one batch and splits its rows by
// threshold and output shard. It touches only b and read-only fields of f.
func (f *scoreFn) score(b *batch) *scored {
	s := &scored{reused: b, n: len(b.lines)}
	items, err := f.items(b)
	if err != nil {
		s.err = err
		return s
	}
	ml, err := f.m.Label(items)
	if err != nil {
		s.err = fmt.Errorf("autolabel: scoring %d items from %s: %w", len(items), b.files[0], err)
		return s
	}
	s.lab = make([][]Label, f.Shards)
	s.ppl = make([][]ForPeople, f.Shards)
	for i, l := range ml {
		it := &items[i]
		sh := shardOf(it.ID, f.Shards)
		if l.Confidence >= f.Threshold {
			s.lab[sh] = append(s.lab[sh], Label{Item: it.ID, Class: l.Class, Confidence: l.Confidence, Model: l.Model})
			continue
		}
		s.ppl[sh] = append(s.ppl[sh], ForPeople{
			ID: it.ID, Kind: string(it.Kind), Text: it.Text, Path: it.Path, Parent: it.Parent,
			Position: int64(it.Position), Covariates: it.Covariates,
			Class: l.Class, Confidence: l.Confidence, Model: l.Model,
		})
	}
	return s
}

// items turns a batch's lines into items. Text records are parsed by
// package ingest, the reader `loop items add` uses, so both accept and
// refuse the same records; the batch is cut into GOMAXPROCS parts parsed at
// once (as Machine.Label then featurises and scores on all cores).
func (f *scoreFn) items(b *batch) ([]handoff.Item, error) {
	n := len(b.lines)
	items := make([]handoff.Item, n)
	if f.Images {
		for i, p := range b.lines {
			items[i] = handoff.Item{ID: b.ids[i], Kind: handoff.KindImage, Path: p}
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
			errs[w] = b.parse(items[lo:hi], lo)
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

// parse reads the records b.lines[lo:lo+len(dst)] into dst.
func (b *batch) parse(dst []handoff.Item, lo int) error {
	var buf bytes.Buffer
	for _, l := range b.lines[lo : lo+len(dst)] {
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
			return fmt.Errorf("autolabel: %s: read %d items from %d records", b.files[lo], i, len(dst))
		}
		if err != nil {
			// Name the source file and the record rather than the
			// line within the batch (textio does not keep line numbers).
			var ie *ingest.Error
			if errors.As(err, &ie) && ie.Line >= 1 && ie.Line <= len(dst) {
				at := lo + ie.Line - 1
				rec := b.lines[at]
				if len(rec) > 80 {
					rec = rec[:80] + "…"
				}
				if ie.Field != "" {
					return fmt.Errorf("%s: record %s: field %q: %w", b.files[at], rec, ie.Field, ie.Err)
				}
				return fmt.Errorf("%s: record %s: %w", b.files[at], rec, ie.Err)
			}
			return err
		}
		dst[i] = it
	}
	return nil
}
