// Command active measures uncertainty sampling against random sampling on
// two real data sets with a known oracle (the data sets' true classes stand
// in for the crowd): testdata/pkgdesc.jsonl (text: TF-IDF word 1–2-grams +
// logistic regression) and the UCI digits in testdata/digits.csv.gz (images:
// each 8×8 digit rendered to a grey image, hand-crafted image features,
// standardised, logistic regression). It writes RESULTS.md and one SVG plot
// per data set.
//
// The published claim checked is that uncertainty sampling beats random
// sampling at equal label budgets on most benchmarks (Lewis & Gale 1994;
// Settles 2009, "Active Learning Literature Survey"). There is no external
// peer program: the peer is random sampling, run on the same test split and
// initial set as entropy for every seed.
package main

import (
	"bufio"
	"compress/gzip"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"image"
	"image/color"
	"log"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"handoff/features"
	"handoff/learner"
	"handoff/plan"
	"handoff/selector"
)

// target is the share of matched budgets at which entropy must be ahead
// (issue 5, "Must show").
const target = 0.80

// tol pins the logistic regression's convergence tolerance, so the curves
// do not move with the learner's default.
var tol = flag.Float64("tol", 1e-6, "logistic Tol")

type dataset struct {
	name, title, file, features string
	X                           features.Matrix
	y                           []int
	k                           int
	lname                       string
}

func (d *dataset) learner(lambda float64) (learner.Learner, string) {
	if d.lname == "forest" {
		return learner.Forest{Trees: 100, Seed: 1}, "random forest, 100 trees"
	}
	return learner.Logistic{Lambda: lambda, Tol: *tol}, fmt.Sprintf("logistic λ = %g", lambda)
}

func seedsUpTo(n int) []uint64 {
	s := make([]uint64, n)
	for i := range s {
		s[i] = uint64(i + 1)
	}
	return s
}

func main() {
	root := flag.String("root", "../..", "repository root (holds testdata/)")
	out := flag.String("out", ".", "folder for RESULTS.md and the SVG plots")
	nseeds := flag.Int("seeds", 10, "number of seeds (1..n)")
	initial := flag.Int("initial", 50, "initial random labelled set")
	batch := flag.Int("batch", 50, "items labelled per step")
	maxLabels := flag.Int("max", 1000, "last budget")
	only := flag.String("only", "", "run one data set (text or images) and print instead of writing RESULTS.md")
	imgLearner := flag.String("img-learner", "logistic", "learner for the digits: logistic or forest")
	lambda := flag.Float64("lambda", 0.1, "logistic λ (round's default)")
	testShare := flag.Float64("test-share", 0.3, "share of rows held apart as the test set")
	sweep := flag.String("sweep", "0.03,0.1,0.3,1", "λ values of the sensitivity table (run with seeds 1–5); empty: none")
	flag.Parse()

	var sets []*dataset
	if *only == "" || *only == "text" {
		d, err := loadText(filepath.Join(*root, "testdata/pkgdesc.jsonl"))
		if err != nil {
			log.Fatal(err)
		}
		sets = append(sets, d)
	}
	if *only == "" || *only == "images" {
		d, err := loadDigits(filepath.Join(*root, "testdata/digits.csv.gz"))
		if err != nil {
			log.Fatal(err)
		}
		d.lname = *imgLearner
		sets = append(sets, d)
	}
	seeds := seedsUpTo(*nseeds)
	cfgFor := func(l learner.Learner) plan.CurveConfig {
		return plan.CurveConfig{Learner: l, Strategy: selector.Entropy, Initial: *initial, Batch: *batch,
			MaxLabels: *maxLabels, TestShare: *testShare}
	}
	var b strings.Builder
	fmt.Fprintf(&b, "# Uncertainty sampling against random sampling\n\n")
	fmt.Fprintf(&b, "Claim checked: uncertainty sampling beats random sampling at equal label budgets on most benchmarks\n")
	fmt.Fprintf(&b, "(Lewis & Gale 1994; Settles 2009, \"Active Learning Literature Survey\"). Target (issue 5): entropy's\n")
	fmt.Fprintf(&b, "mean test accuracy above random's at ≥ %.0f%% of the matched budgets between %d and %d labels,\n", 100*target, *initial+*batch, *maxLabels)
	fmt.Fprintf(&b, "curves averaged over ≥ 5 seeds.\n\n")
	fmt.Fprintf(&b, "There is no external peer program: the peer is **random sampling**, run by the same code\n")
	fmt.Fprintf(&b, "(`plan.CompareStrategies`) on the same test split and the same initial labelled set for every seed.\n")
	fmt.Fprintf(&b, "The data sets' true classes stand in for the crowd (a perfect oracle). Per seed: %.0f%% of the rows are a\n", 100**testShare)
	fmt.Fprintf(&b, "random test set, never labelled or picked; %d random pool rows are labelled first; then %d rows per step\n", *initial, *batch)
	fmt.Fprintf(&b, "are picked by the entropy of the model's probabilities (`selector.Select`) or at random, refitting at each\n")
	fmt.Fprintf(&b, "budget. Features are fitted without labels on all rows (in pool-based active learning the unlabelled\n")
	fmt.Fprintf(&b, "pool is available). Logistic regression with Tol = %g pinned. Reproduce: `bench/active/run.sh`.\n\n", *tol)
	fmt.Fprintf(&b, "## Result (seeds 1–%d)\n\n", len(seeds))
	fmt.Fprintf(&b, "| data set | features | learner | budgets compared | entropy ahead | share | target | result | time |\n|---|---|---|---|---|---|---|---|---|\n")
	var tables, summary strings.Builder
	fmt.Fprintf(&summary, "\n## Summary\n\n| figure | ours | peer | ratio | target | result |\n| --- | --- | --- | --- | --- | --- |\n")
	for _, d := range sets {
		l, desc := d.learner(*lambda)
		start := time.Now()
		c, err := plan.CompareStrategies(d.X, d.y, d.k, cfgFor(l), seeds)
		if err != nil {
			log.Fatalf("%s: %v", d.name, err)
		}
		el := time.Since(start)
		log.Printf("%s, %s, %d seeds: entropy ahead at %d of %d budgets (%.0f%%) in %v", d.name, desc, len(seeds), c.Ahead, c.Matched, 100*c.Share, el.Round(time.Second))
		fmt.Fprintf(&b, "| %s (%d rows, %d classes) | %s | %s | %d | %d | %.1f%% | ≥ %.0f%% | **%s** | %.0f s |\n",
			d.file, len(d.y), d.k, d.features, desc, c.Matched, c.Ahead, 100*c.Share, 100*target, verdictOf(c.Share), el.Seconds())
		last := len(c.Uncertain.Points) - 1
		fmt.Fprintf(&summary, "| %s: budgets 100–1,000 where entropy sampling beats random (%d seeds); accuracy at %d labels | %d of %d (%.1f%%); %.3f | random sampling; %.3f | — | ≥ %.0f%% of budgets | %s |\n",
			d.file, len(seeds), c.Uncertain.Points[last].Labels, c.Ahead, c.Matched, 100*c.Share, 1-c.Uncertain.Points[last].Error, 1-c.Random.Points[last].Error, 100*target, verdictOf(c.Share))
		fmt.Fprintf(&tables, "\n## %s\n\nMean test accuracy over seeds 1–%d (± standard deviation over seeds), %s; plot: `curves-%s.svg`.\n\n", d.title, len(seeds), desc, d.name)
		fmt.Fprintf(&tables, "| labels | entropy | random | entropy − random |\n|---:|---:|---:|---:|\n")
		for i, p := range c.Uncertain.Points {
			r := c.Random.Points[i]
			mark := ""
			if p.Labels > *initial && p.Error < r.Error {
				mark = " ✓"
			}
			fmt.Fprintf(&tables, "| %d | %.4f ± %.4f | %.4f ± %.4f | %+.4f%s |\n", p.Labels, 1-p.Error, c.UncertainSD[i], 1-r.Error, c.RandomSD[i], r.Error-p.Error, mark)
		}
		if err := plotCurves(filepath.Join(*out, "curves-"+d.name+".svg"), d.title, c); err != nil {
			log.Fatal(err)
		}
	}
	b.WriteString(tables.String())
	fmt.Fprintf(&b, "\nAt the first budget (%d labels) both strategies train on the same initial set, so it is not compared. ✓ marks a budget where entropy is ahead.\n", *initial)
	if *sweep != "" {
		fmt.Fprintf(&b, "\n## Sensitivity: penalty λ and tolerance, seeds 1–5 only\n\n")
		fmt.Fprintf(&b, "The same runs with five seeds (the issue's minimum), other penalties and the learner's default\n")
		fmt.Fprintf(&b, "convergence tolerance instead of the pinned one, to show how much the share\n")
		fmt.Fprintf(&b, "moves: at small budgets on the texts entropy and random are close (cold start), so with few seeds the\n")
		fmt.Fprintf(&b, "sign of the difference there is partly noise.\n\n")
		fmt.Fprintf(&b, "| data set | learner | entropy ahead | share | result |\n|---|---|---|---|---|\n")
		for _, d := range sets {
			type run struct {
				lam        float64
				defaultTol bool
			}
			var runs []run
			for _, f := range strings.Split(*sweep, ",") {
				lam, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
				if err != nil {
					log.Fatalf("-sweep: %v", err)
				}
				runs = append(runs, run{lam, false})
			}
			// And the main λ with the learner's own default tolerance.
			runs = append(runs, run{*lambda, true})
			for _, r := range runs {
				l, desc := d.learner(r.lam)
				if lg, ok := l.(learner.Logistic); ok && r.defaultTol {
					lg.Tol = 0
					l, desc = lg, desc+", learner's default Tol"
				}
				c, err := plan.CompareStrategies(d.X, d.y, d.k, cfgFor(l), seedsUpTo(5))
				if err != nil {
					log.Fatalf("%s: %v", d.name, err)
				}
				log.Printf("%s, %s, 5 seeds: entropy ahead at %d of %d budgets (%.0f%%)", d.name, desc, c.Ahead, c.Matched, 100*c.Share)
				fmt.Fprintf(&b, "| %s | %s | %d of %d | %.1f%% | %s |\n", d.file, desc, c.Ahead, c.Matched, 100*c.Share, verdictOf(c.Share))
				if d.lname == "forest" {
					break
				}
			}
		}
	}
	b.WriteString(summary.String())
	if *only != "" {
		fmt.Print(b.String())
		return
	}
	if err := os.WriteFile(filepath.Join(*out, "RESULTS.md"), []byte(b.String()), 0o644); err != nil {
		log.Fatal(err)
	}
}

func verdictOf(share float64) string {
	if share >= target {
		return "pass"
	}
	return "short"
}

// loadText reads pkgdesc.jsonl: TF-IDF word 1–2-grams (sublinear tf, L2
// norm, min_df 2) with the section as the class.
func loadText(path string) (*dataset, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var texts []string
	var labels []string
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for n := 1; sc.Scan(); n++ {
		var r struct{ Text, Section string }
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			return nil, fmt.Errorf("%s:%d: %v", path, n, err)
		}
		texts = append(texts, r.Text)
		labels = append(labels, r.Section)
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	keys := slices.Clone(labels)
	slices.Sort(keys)
	keys = slices.Compact(keys)
	y := make([]int, len(labels))
	for i, l := range labels {
		y[i], _ = slices.BinarySearch(keys, l)
	}
	tc := features.DefaultTextConfig()
	tc.MinDF = 2
	v, err := tc.Fit(texts)
	if err != nil {
		return nil, err
	}
	return &dataset{name: "text", title: "Text: Debian package descriptions (pkgdesc.jsonl)", file: "pkgdesc.jsonl",
		features: fmt.Sprintf("TF-IDF word 1–2-grams, min_df 2 (%d columns)", v.Cols()),
		X:        v.Transform(texts), y: y, k: len(keys)}, nil
}

// loadDigits reads the UCI digits: each 8×8 digit drawn as a 64×64 grey
// image (features.RenderGray), features.DefaultImageConfig features,
// standardised (features.Scaler).
func loadDigits(path string) (*dataset, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	z, err := gzip.NewReader(f)
	if err != nil {
		return nil, err
	}
	recs, err := csv.NewReader(z).ReadAll()
	if err != nil {
		return nil, err
	}
	imgs := make([]image.Image, len(recs))
	y := make([]int, len(recs))
	for i, r := range recs {
		if len(r) != 65 {
			return nil, fmt.Errorf("%s row %d: %d fields, want 65", path, i+1, len(r))
		}
		px := make([]float64, 64)
		for j := range px {
			v, err := strconv.ParseFloat(r[j], 64)
			if err != nil {
				return nil, fmt.Errorf("%s row %d: %v", path, i+1, err)
			}
			px[j] = v / 16
		}
		if y[i], err = strconv.Atoi(r[64]); err != nil {
			return nil, fmt.Errorf("%s row %d: %v", path, i+1, err)
		}
		imgs[i] = features.RenderGray(px, 8, 8, 8)
	}
	ic := features.DefaultImageConfig()
	x, err := ic.Transform(imgs)
	if err != nil {
		return nil, err
	}
	sc, err := features.FitScaler(x, ic.Names())
	if err != nil {
		return nil, err
	}
	xs, err := sc.Transform(x)
	if err != nil {
		return nil, err
	}
	return &dataset{name: "images", title: "Images: UCI handwritten digits rendered as images", file: "digits.csv.gz",
		features: fmt.Sprintf("%d hand-crafted image features, standardised", x.NCols), X: xs, y: y, k: 10}, nil
}

// plotCurves draws mean test accuracy against labels for both strategies.
func plotCurves(path, title string, c *plan.Comparison) error {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = "labelled items"
	p.Y.Label.Text = fmt.Sprintf("mean test accuracy (%d seeds)", len(c.Seeds))
	p.Add(plotter.NewGrid())
	for _, s := range []struct {
		name  string
		pts   []float64
		x     []int
		col   color.Color
		dash  bool
		glyph draw.GlyphDrawer
	}{
		{"entropy", nil, nil, color.RGBA{R: 0x13, G: 0x5e, B: 0x66, A: 255}, false, draw.CircleGlyph{}},
		{"random", nil, nil, color.RGBA{R: 0xb0, G: 0x7d, B: 0x1a, A: 255}, true, draw.SquareGlyph{}},
	} {
		src := c.Uncertain.Points
		if s.name == "random" {
			src = c.Random.Points
		}
		xy := make(plotter.XYs, len(src))
		for i, q := range src {
			xy[i] = plotter.XY{X: float64(q.Labels), Y: 1 - q.Error}
		}
		l, sc, err := plotter.NewLinePoints(xy)
		if err != nil {
			return err
		}
		l.Color, sc.Color, sc.Shape = s.col, s.col, s.glyph
		if s.dash {
			l.Dashes = []vg.Length{vg.Points(3), vg.Points(2)}
		}
		p.Add(l, sc)
		p.Legend.Add(s.name, l, sc)
	}
	p.Legend.Top = false
	p.Legend.Left = false
	return p.Save(16*vg.Centimeter, 10*vg.Centimeter, path)
}
