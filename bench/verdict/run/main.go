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
	"strings"
	"time"

	"handoff/bench/verdict"
	"handoff/crowd"
	"handoff/verdict"
)

func main() {
	projects := flag.Int("projects", 5000, "simulated projects")
	archive := flag.Int("archive", 20000, "archive items per project")
	maxErr := flag.Float64("max-error", 0.05, "max-error")
	level := flag.Float64("confidence", 0.95, "confidence of the bound")
	seed := flag.Uint64("seed", 2026, "seed")
	grid := flag.String("cp", "", "write Clopper–Pearson bounds over a (k, n) grid to this file")
	looks := flag.Int("looks", 500, "projects of the repeated-looks simulation (0: skip it)")
	looksMD := flag.String("looks-md", "", "write the repeated-looks tables (Markdown) to this file")
	looksOnly := flag.String("looks-method", "", "run the repeated-looks tables of this consensus method only (default: the default and one-coin)")
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

	if *looks > 0 {
		var md strings.Builder
		for _, c := range []struct {
			maxErr float64
			method string
		}{{0.05, ""}, {0.10, ""}, {0.05, crowd.MethodOneCoin}, {0.10, crowd.MethodOneCoin}} {
			if *looksOnly != "" && c.method != *looksOnly && !(c.method == "" && *looksOnly == "default") {
				continue
			}
			t0 := time.Now()
			r, err := honest.RunLooks(honest.LooksConfig{Projects: *looks, MaxError: c.maxErr, Level: *level, Seed: *seed, Method: c.method})
			if err != nil {
				log.Fatal(err)
			}
			method := r.Config.Method
			if c.method == "" {
				method += " (the default)"
			}
			fmt.Fprintf(&md, "\n### max-error %.2f, consensus %s\n\n%d projects, %.0f s; the settled reference labels err against the truth on %.1f%% of items (mean over projects at their last look).\n\n",
				c.maxErr, method, *looks, time.Since(t0).Seconds(), 100*r.ReferenceError)
			md.WriteString("| rule | GO verdicts (of projects) | exceeded max-error against the truth | rate | mean look of the first GO | mean archive coverage | |\n| --- | --- | --- | --- | --- | --- | --- |\n")
			for k, x := range r.Rules {
				rate, verdictStr := "—", "comparison"
				if x.Go > 0 {
					rate = fmt.Sprintf("%.2f%%", 100*float64(x.Exceed)/float64(x.Go))
				}
				if k == 0 {
					verdictStr = "≤ 5%: pass"
					if x.Go > 0 && float64(x.Exceed) > 0.05*float64(x.Go) {
						verdictStr = "≤ 5%: short"
					}
					if x.Go == 0 {
						verdictStr = "no GO: nothing to measure"
					}
					fmt.Printf("looks_%g_%s_go %d\nlooks_%g_%s_exceed %d\n", c.maxErr, r.Config.Method, x.Go, c.maxErr, r.Config.Method, x.Exceed)
				}
				fmt.Fprintf(&md, "| %s | %d | %d | %s | %.1f | %.2f | %s |\n", x.Rule, x.Go, x.Exceed, rate, x.Look, x.Coverage, verdictStr)
			}
		}
		if *looksMD != "" {
			if err := os.WriteFile(*looksMD, []byte(md.String()), 0o644); err != nil {
				log.Fatal(err)
			}
		} else {
			fmt.Print(md.String())
		}
	}

	start := time.Now()
	res, err := honest.Run(*projects, *archive, *maxErr, *level, *seed)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("projects %d\ngo %d\nexceed %d\nnaive_go %d\nnaive_exceed %d\nmean_coverage %.4f\nsim_seconds %.2f\n",
		res.Projects, res.Go, res.Exceed, res.NaiveGo, res.NaiveExceed, res.MeanCoverage, time.Since(start).Seconds())
}
