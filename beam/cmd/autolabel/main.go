// Command autolabel labels an archive in bulk on Apache Beam with a model
// exported by `loop model export`: machine labels for items at or above
// the threshold, the rest queued for people, both as sharded JSONL and
// Parquet. It runs on the embedded Prism runner by default and on Flink,
// Spark or Dataflow with Beam's usual flags (--runner, --endpoint,
// --environment_type, …); see beam/README.md.
//
//	autolabel --items 'archive/*.jsonl' --model model.gz --out labelled/
package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"slices"
	"strings"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/core/metrics"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/x/beamx"

	"handoff/beam/autolabel"
)

var (
	items     = flag.String("items", "", "item files: a path or glob on any Beam filesystem, JSONL item records (id, text, …) or, with --images, image paths one per line")
	images    = flag.Bool("images", false, "the item files list image paths, one per line")
	model     = flag.String("model", "", "the model file written by `loop model export`")
	threshold = flag.Float64("threshold", 0, "confidence at or above which an item gets a machine label (0: the threshold recorded in the model)")
	out       = flag.String("out", "", "output folder (any Beam filesystem)")
	shards    = flag.Int("shards", 4, "shards per output")
	batch     = flag.Int("batch", 1000, "items scored per call")
	pq        = flag.Bool("parquet", true, "also write each shard as Parquet")
)

func main() {
	flag.Parse()
	beam.Init()
	ctx := context.Background()
	p, s := beam.NewPipelineWithRoot()
	cfg := autolabel.Config{Items: *items, Images: *images, Model: *model, Threshold: *threshold,
		Out: *out, Shards: *shards, Batch: *batch, Parquet: *pq}
	if _, err := autolabel.Build(ctx, s, cfg); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(2)
	}
	res, err := beamx.RunWithMetrics(ctx, p)
	if err != nil {
		fmt.Fprintln(os.Stderr, "autolabel:", err)
		os.Exit(1)
	}
	if res != nil {
		cs := res.Metrics().AllMetrics().Counters()
		slices.SortFunc(cs, func(a, b metrics.CounterResult) int { return strings.Compare(a.Key.Name, b.Key.Name) })
		for _, c := range cs {
			fmt.Printf("%s\t%d\n", c.Key.Name, c.Result())
		}
	}
}
