// Package autolabel builds the Beam pipeline that labels an archive in bulk:
// it reads items, scores them with a model exported by `loop model export`
// (featurised and scored by the main module's learner.Machine, the same code
// `loop autolabel` runs), splits them at the threshold, and writes the
// machine labels and the items left for people as sharded JSONL and Parquet.
//
// The pipeline is plain Beam: it runs on the embedded Prism runner, and on
// Flink, Spark or Dataflow with Beam's usual flags (see README.md).
package autolabel

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"io"
	"path"
	"strings"
	"sync"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/io/filesystem/local" // local paths

	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/textio"

	"handoff/learner"
)

// Config says what the pipeline reads and writes.
//
// Items is a file or glob on any Beam filesystem (local paths, gs://, s3://
// when its filesystem package is linked in); each file holds JSONL item
// records as `loop items add` reads them (fields id and text required;
// parent, position and any other field kept as a covariate), or, with
// Images, image paths one per line (blank lines and lines starting with #
// skipped; the id is the path as written; a relative path is taken from the
// list file's folder). Image files themselves are read with the local file
// system of the worker.
//
// Model is the file `loop model export` writes. Threshold is the confidence
// at or above which an item gets a machine label; 0 means the threshold
// recorded in the model file. Out is the output folder (any Beam
// filesystem); Shards (default 4) is the number of shards per output and
// Batch (default 1000) the number of items scored in one call. Parquet, if
// set, writes a .parquet file beside each .jsonl shard.
type Config struct {
	Items     string
	Images    bool
	Model     string
	Threshold float64
	Out       string
	Shards    int
	Batch     int
	Parquet   bool
}

func (c *Config) check() error {
	if c.Items == "" {
		return errors.New("autolabel: no items given (a file or glob of JSONL items or image lists)")
	}
	if c.Model == "" {
		return errors.New("autolabel: no model given (the file `loop model export` writes)")
	}
	if c.Out == "" {
		return errors.New("autolabel: no output folder given")
	}
	if c.Shards == 0 {
		c.Shards = 4
	}
	if c.Batch == 0 {
		c.Batch = 1000
	}
	if c.Shards < 1 || c.Batch < 1 {
		return fmt.Errorf("autolabel: shards (%d) and batch (%d) must be at least 1", c.Shards, c.Batch)
	}
	if c.Threshold < 0 || c.Threshold > 1 || c.Threshold != c.Threshold {
		return fmt.Errorf("autolabel: threshold %v is not between 0 and 1", c.Threshold)
	}
	return nil
}

// Build adds the pipeline to scope s and returns the PCollection<string> of
// the paths of the files written. It reads the model once to check it (and
// its threshold) before anything runs, so a wrong path or a model without a
// threshold fails here rather than on the workers.
func Build(ctx context.Context, s beam.Scope, c Config) (beam.PCollection, error) {
	if err := c.check(); err != nil {
		return beam.PCollection{}, err
	}
	m, err := loadModel(ctx, c.Model)
	if err != nil {
		return beam.PCollection{}, err
	}
	thr := c.Threshold
	if thr == 0 {
		thr = m.Threshold()
	}
	if thr <= 0 || thr > 1 {
		return beam.PCollection{}, fmt.Errorf("autolabel: %s records no autolabel threshold; give one (e.g. --threshold 0.9)", c.Model)
	}
	s = s.Scope("autolabel")
	lines := textio.ReadWithFilename(s, c.Items)
	labels, people := beam.ParDo2(s, &scoreFn{
		Model: c.Model, Threshold: thr, Images: c.Images, Batch: c.Batch, Shards: c.Shards,
	}, lines)
	wl := beam.ParDo(s.Scope("write labels"), &writeLabelsFn{Out: c.Out, Shards: c.Shards, Parquet: c.Parquet},
		beam.GroupByKey(s, labels))
	wp := beam.ParDo(s.Scope("write people"), &writePeopleFn{Out: c.Out, Shards: c.Shards, Parquet: c.Parquet},
		beam.GroupByKey(s, people))
	return beam.Flatten(s, wl, wp), nil
}

// ShardName returns the name of shard i of n for output kind ("labels" or
// "people") and extension ("jsonl" or "parquet"), e.g.
// labels-00001-of-00004.jsonl.
func ShardName(kind string, i, n int, ext string) string {
	return fmt.Sprintf("%s-%05d-of-%05d.%s", kind, i, n, ext)
}

// shardOf returns the shard of an item id: FNV-1a 32-bit hash mod n.
func shardOf(id string, n int) int {
	h := fnv.New32a()
	io.WriteString(h, id)
	return int(h.Sum32() % uint32(n))
}

// joinPath joins a folder on any Beam filesystem ("gs://b/x", "/tmp/x")
// with a file name.
func joinPath(dir, name string) string {
	return strings.TrimSuffix(dir, "/") + "/" + name
}

var (
	modelsMu sync.Mutex
	models   = map[string]*learner.Machine{}
)

// loadModel reads a model file from any Beam filesystem once per process;
// later calls with the same path share it (learner.Machine is safe for
// concurrent scoring).
func loadModel(ctx context.Context, p string) (*learner.Machine, error) {
	modelsMu.Lock()
	defer modelsMu.Unlock()
	if m, ok := models[p]; ok {
		return m, nil
	}
	fs, err := filesystem.New(ctx, p)
	if err != nil {
		return nil, fmt.Errorf("autolabel: model %s: %w", p, err)
	}
	defer fs.Close()
	r, err := fs.OpenRead(ctx, p)
	if err != nil {
		return nil, fmt.Errorf("autolabel: model %s: %w", p, err)
	}
	defer r.Close()
	m, err := learner.ReadMachine(r)
	if err != nil {
		return nil, fmt.Errorf("autolabel: model %s: %w", p, err)
	}
	models[p] = m
	return m, nil
}

// resolve returns an image path from a list file as the worker opens it:
// absolute paths as they are, relative ones from the list file's folder.
func resolve(listFile, p string) string {
	if path.IsAbs(p) || strings.Contains(p, "://") {
		return p
	}
	i := strings.LastIndex(listFile, "/")
	if i < 0 {
		return path.Clean(p)
	}
	if strings.Contains(listFile, "://") {
		// path.Join would fold the scheme's "//".
		return listFile[:i+1] + path.Clean(p)
	}
	return path.Join(listFile[:i], p)
}
