//go:build ignore

// gen writes N short text items as CSV (id,text,site,year) to stdout,
// deterministic given the seed: go run gen.go -n 1000000 > items.csv
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
	flag.Parse()
	rng := rand.New(rand.NewPCG(*seed, 2))
	w := bufio.NewWriterSize(os.Stdout, 1<<20)
	defer w.Flush()
	fmt.Fprintln(w, "id,text,site,year")
	for i := 0; i < *n; i++ {
		k := 6 + rng.IntN(10)
		fmt.Fprintf(w, "r%07d,", i)
		for j := 0; j < k; j++ {
			if j > 0 {
				w.WriteByte(' ')
			}
			w.WriteString(words[rng.IntN(len(words))])
		}
		fmt.Fprintf(w, ".,site%03d,%d\n", rng.IntN(400), 2015+rng.IntN(10))
	}
}
