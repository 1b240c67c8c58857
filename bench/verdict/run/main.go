// Command run is the verdict benchmark: the large "honest bound" simulation
// (issue 5) and our Clopper–Pearson bounds over a grid, written for the peer
// script (bench/verdict/peer.py, scipy) to compare. bench/verdict/run.sh
// runs both and writes RESULTS.md.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"log"
	"os"
	"time"

	"handoff/bench/verdict"
	"handoff/verdict"
)

func main() {
	projects := flag.Int("projects", 5000, "simulated projects")
	archive := flag.Int("archive", 20000, "archive items per project")
	maxErr := flag.Float64("max-error", 0.05, "max-error")
	level := flag.Float64("confidence", 0.95, "confidence of the bound")
	seed := flag.Uint64("seed", 2026, "seed")
	grid := flag.String("cp", "", "write Clopper–Pearson bounds over a (k, n) grid to this file")
	flag.Parse()

	if *grid != "" {
		f, err := os.Create(*grid)
		if err != nil {
			log.Fatal(err)
		}
		w := bufio.NewWriter(f)
		start := time.Now()
		count := 0
		for _, n := range []int{1, 2, 5, 10, 20, 50, 100, 200, 263, 300, 500, 1000, 2000, 5000, 10000} {
			for k := 0; k <= n; k += max(1, n/50) {
				lo, hi := verdict.ClopperPearson(k, n, 0.95)
				up := verdict.UpperBound(k, n, 0.95)
				fmt.Fprintf(w, "%d %d %.17g %.17g %.17g\n", k, n, lo, hi, up)
				count++
			}
		}
		el := time.Since(start)
		if err := w.Flush(); err != nil {
			log.Fatal(err)
		}
		f.Close()
		fmt.Printf("cp_count %d\ncp_seconds %.6f\n", count, el.Seconds())
	}

	start := time.Now()
	res, err := honest.Run(*projects, *archive, *maxErr, *level, *seed)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("projects %d\ngo %d\nexceed %d\nnaive_go %d\nnaive_exceed %d\nmean_coverage %.4f\nsim_seconds %.2f\n",
		res.Projects, res.Go, res.Exceed, res.NaiveGo, res.NaiveExceed, res.MeanCoverage, time.Since(start).Seconds())
}
