package autolabel

import (
	"bufio"
	"cmp"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"reflect"
	"slices"

	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/register"
	"github.com/parquet-go/parquet-go"
)

func init() {
	register.DoFn4x1[context.Context, int, func(*labelRows) bool, func(string), error](&writeLabelsFn{})
	register.DoFn4x1[context.Context, int, func(*peopleRows) bool, func(string), error](&writePeopleFn{})
	register.Emitter1[string]()
	register.Iter1[labelRows]()
	register.Iter1[peopleRows]()
}

func typeOf[T any]() reflect.Type { return reflect.TypeFor[T]() }

// writeLabelsFn writes one shard of machine labels, rows sorted by item id,
// as labels-SSSSS-of-NNNNN.jsonl (and .parquet), and emits the paths it
// wrote. A retried shard rewrites the same files.
//
// The writers emit their paths for a second reason: Prism 2.77.0 polls a
// bundle of a stage with no outputs in a busy loop until it ends, which
// takes a core away from the workers (and starves them with one core).
type writeLabelsFn struct {
	Out     string
	Shards  int
	Parquet bool
}

func (f *writeLabelsFn) ProcessElement(ctx context.Context, shard int, it func(*labelRows) bool, emit func(string)) error {
	var rows []Label
	var b labelRows
	for it(&b) {
		rows = append(rows, b.Rows...)
	}
	slices.SortFunc(rows, func(a, b Label) int { return cmp.Compare(a.Item, b.Item) })
	return writeShard(ctx, f.Out, "labels", shard, f.Shards, f.Parquet, rows, emit)
}

// writePeopleFn writes one shard of the items left for people, sorted by
// id, as people-SSSSS-of-NNNNN.jsonl (and .parquet).
type writePeopleFn struct {
	Out     string
	Shards  int
	Parquet bool
}

func (f *writePeopleFn) ProcessElement(ctx context.Context, shard int, it func(*peopleRows) bool, emit func(string)) error {
	var rows []ForPeople
	var b peopleRows
	for it(&b) {
		rows = append(rows, b.Rows...)
	}
	slices.SortFunc(rows, func(a, b ForPeople) int { return cmp.Compare(a.ID, b.ID) })
	return writeShard(ctx, f.Out, "people", shard, f.Shards, f.Parquet, rows, emit)
}

// writeShard writes rows as JSONL, one object per line, and, if pq is set,
// as Parquet (github.com/parquet-go/parquet-go, schema from the struct
// tags, Snappy-compressed pages), through the Beam filesystem of dir, and
// emits each path written.
func writeShard[T any](ctx context.Context, dir, kind string, shard, n int, pq bool, rows []T, emit func(string)) error {
	jp := joinPath(dir, ShardName(kind, shard, n, "jsonl"))
	err := create(ctx, jp, func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, 1<<20)
		enc := json.NewEncoder(bw)
		enc.SetEscapeHTML(false)
		for i := range rows {
			if err := enc.Encode(rows[i]); err != nil {
				return err
			}
		}
		return bw.Flush()
	})
	if err != nil {
		return err
	}
	emit(jp)
	if !pq {
		return nil
	}
	pp := joinPath(dir, ShardName(kind, shard, n, "parquet"))
	err = create(ctx, pp, func(w io.Writer) error {
		pw := parquet.NewGenericWriter[T](w, parquet.Compression(&parquet.Snappy))
		if _, err := pw.Write(rows); err != nil {
			return err
		}
		return pw.Close()
	})
	if err != nil {
		return err
	}
	emit(pp)
	return nil
}

// create opens p for writing on its Beam filesystem, calls write and
// closes it, reporting the first error with the file's name.
func create(ctx context.Context, p string, write func(io.Writer) error) error {
	fs, err := filesystem.New(ctx, p)
	if err != nil {
		return fmt.Errorf("autolabel: %s: %w", p, err)
	}
	defer fs.Close()
	w, err := fs.OpenWrite(ctx, p)
	if err != nil {
		return fmt.Errorf("autolabel: %s: %w", p, err)
	}
	if err := write(w); err != nil {
		w.Close()
		return fmt.Errorf("autolabel: writing %s: %w", p, err)
	}
	if err := w.Close(); err != nil {
		return fmt.Errorf("autolabel: closing %s: %w", p, err)
	}
	return nil
}
