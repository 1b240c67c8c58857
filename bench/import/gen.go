//go:build ignore

// gen writes N short text items as CSV (id,text,site,year) or JSONL to
// stdout, deterministic given the seed:
//
//	go run gen.go -n 1000000 > items.csv
//	go run gen.go -n 1000000 -format jsonl > items.jsonl
//	go run gen.go -n 1000000 -format labels > labels.csv
//
// Labels (item,annotator,label,seconds) name items r0000000…r(items-1) in
// random order, by 50 annotators, classes a and b.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
)

var words = []string{"river", "bank", "oil", "foam", "heron", "litter", "bottle", "erosion",
	"fish", "otter", "bag", "tyre", "discoloured", "water", "near", "the", "bridge", "weir",
	"upstream", "downstream", "smell", "dead", "nest", "reeds", "collapsed", "path", "sheen"}

func main() {
	n := flag.Int("n", 1_000_000, "number of items")
	seed := flag.Uint64("seed", 1, "random seed")
	format := flag.String("format", "csv", "csv, jsonl or labels")
	items := flag.Int("items", 1_000_000, "with -format labels: number of items labelled")
	flag.Parse()
	rng := rand.New(rand.NewPCG(*seed, 2))
	w := bufio.NewWriterSize(os.Stdout, 1<<20)
	defer w.Flush()
	if *format == "labels" {
		fmt.Fprintln(w, "item,annotator,label,seconds")
		for i := 0; i < *n; i++ {
			fmt.Fprintf(w, "r%07d,ann%02d,%c,%.1f\n", rng.IntN(*items), rng.IntN(50), "ab"[rng.IntN(2)], 1+rng.Float64()*30)
		}
		return
	}
	jsonl := *format == "jsonl"
	if !jsonl {
		fmt.Fprintln(w, "id,text,site,year")
	}
	for i := 0; i < *n; i++ {
		k := 6 + rng.IntN(10)
		if jsonl {
			fmt.Fprintf(w, `{"id":"r%07d","text":"`, i)
		} else {
			fmt.Fprintf(w, "r%07d,", i)
		}
		for j := 0; j < k; j++ {
			if j > 0 {
				w.WriteByte(' ')
			}
			w.WriteString(words[rng.IntN(len(words))])
		}
		site, year := rng.IntN(400), 2015+rng.IntN(10)
		if jsonl {
			fmt.Fprintf(w, `.","site":"site%03d","year":%d}`+"\n", site, year)
		} else {
			fmt.Fprintf(w, ".,site%03d,%d\n", site, year)
		}
	}
}
