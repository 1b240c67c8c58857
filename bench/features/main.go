// Command features measures the throughput of package features: images
// featurised per second per core (128×128 PNGs, decode included, generated
// here with a fixed seed) and text fitting and transform speed on a corpus of
// one text per line. It prints one JSON object; run.sh puts it beside the
// peer's figures in RESULTS.md.
//
//	go run ./bench/features -texts texts.txt -images DIR -n 2000
package main

import (
	"bufio"
	"encoding/json"
	"flag"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"log"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"syscall"
	"time"

	"handoff/features"
)

func main() {
	textsPath := flag.String("texts", "", "file with one text per line")
	imgDir := flag.String("images", "", "directory to write the generated PNGs to")
	n := flag.Int("n", 2000, "number of images")
	reps := flag.Int("reps", 3, "repeats; the best time counts")
	flag.Parse()
	out := map[string]any{"cores": runtime.NumCPU(), "go": runtime.Version()}
	if *imgDir != "" {
		paths := writeImages(*imgDir, *n)
		cfg := features.DefaultImageConfig()
		for _, procs := range []int{1, runtime.NumCPU()} {
			runtime.GOMAXPROCS(procs)
			best, bestCPU := math.Inf(1), math.Inf(1)
			for r := 0; r < *reps; r++ {
				t0, c0 := time.Now(), cpuSeconds()
				if _, err := cfg.TransformFiles(paths); err != nil {
					log.Fatal(err)
				}
				best = math.Min(best, time.Since(t0).Seconds())
				bestCPU = math.Min(bestCPU, cpuSeconds()-c0)
			}
			out[fmt.Sprintf("images_per_s_%dcore", procs)] = float64(len(paths)) / best
			out[fmt.Sprintf("images_per_cpu_s_%dcore", procs)] = float64(len(paths)) / bestCPU
		}
		out["images"] = len(paths)
		out["image_features"] = len(cfg.Names())
	}
	if *textsPath != "" {
		texts := readLines(*textsPath)
		cfg := features.DefaultTextConfig()
		cfg.MinDF = 2
		runtime.GOMAXPROCS(runtime.NumCPU())
		var v *features.TextVectorizer
		best, bestCPU := math.Inf(1), math.Inf(1)
		for r := 0; r < *reps; r++ {
			t0, c0 := time.Now(), cpuSeconds()
			var err error
			if v, err = cfg.Fit(texts); err != nil {
				log.Fatal(err)
			}
			best = math.Min(best, time.Since(t0).Seconds())
			bestCPU = math.Min(bestCPU, cpuSeconds()-c0)
		}
		out["texts"] = len(texts)
		out["text_fit_s"] = best
		out["text_fit_cpu_s"] = bestCPU
		out["vocabulary"] = len(v.Names())
		for _, procs := range []int{1, runtime.NumCPU()} {
			runtime.GOMAXPROCS(procs)
			best, bestCPU := math.Inf(1), math.Inf(1)
			var nnz int
			for r := 0; r < 3*(*reps); r++ { // cheap: more repeats, best counts
				t0, c0 := time.Now(), cpuSeconds()
				m := v.Transform(texts)
				best = math.Min(best, time.Since(t0).Seconds())
				bestCPU = math.Min(bestCPU, cpuSeconds()-c0)
				nnz = len(m.Data)
			}
			out[fmt.Sprintf("text_transform_per_s_%dcore", procs)] = float64(len(texts)) / best
			out[fmt.Sprintf("text_transform_per_cpu_s_%dcore", procs)] = float64(len(texts)) / bestCPU
			out["text_nnz"] = nnz
		}
	}
	json.NewEncoder(os.Stdout).Encode(out)
}

// cpuSeconds returns the user and system CPU time this process has used, so
// that per-core figures hold even when other work shares the machine.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		log.Fatal(err)
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()).Seconds()
}

func readLines(path string) []string {
	f, err := os.Open(path)
	if err != nil {
		log.Fatal(err)
	}
	defer f.Close()
	var lines []string
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	for sc.Scan() {
		lines = append(lines, sc.Text())
	}
	if err := sc.Err(); err != nil {
		log.Fatal(err)
	}
	return lines
}

// writeImages draws n 128×128 RGB scenes (a sky gradient, a few soft
// coloured ellipses and pixel noise; seed 1) and writes them as PNGs.
func writeImages(dir string, n int) []string {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		log.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 1))
	paths := make([]string, n)
	for k := range paths {
		img := image.NewRGBA(image.Rect(0, 0, 128, 128))
		type blob struct{ x, y, a, b, th, r, g, bl float64 }
		var blobs []blob
		for j := 0; j < 1+rng.IntN(4); j++ {
			blobs = append(blobs, blob{rng.Float64() * 128, rng.Float64() * 128, 5 + rng.Float64()*30, 5 + rng.Float64()*30,
				rng.Float64() * math.Pi, rng.Float64(), rng.Float64(), rng.Float64()})
		}
		base := rng.Float64() * 0.3
		for y := 0; y < 128; y++ {
			for x := 0; x < 128; x++ {
				r, g, b := base, base+float64(y)/512, base+float64(x)/512
				for _, o := range blobs {
					dx, dy := float64(x)-o.x, float64(y)-o.y
					u := (dx*math.Cos(o.th) + dy*math.Sin(o.th)) / o.a
					v := (-dx*math.Sin(o.th) + dy*math.Cos(o.th)) / o.b
					w := math.Exp(-(u*u + v*v))
					r, g, b = r+w*o.r, g+w*o.g, b+w*o.bl
				}
				noise := (rng.Float64() - 0.5) * 0.06
				img.SetRGBA(x, y, color.RGBA{clamp(r + noise), clamp(g + noise), clamp(b + noise), 255})
			}
		}
		p := filepath.Join(dir, fmt.Sprintf("img%05d.png", k))
		f, err := os.Create(p)
		if err != nil {
			log.Fatal(err)
		}
		if err := png.Encode(f, img); err != nil {
			log.Fatal(err)
		}
		f.Close()
		paths[k] = p
	}
	return paths
}

func clamp(v float64) uint8 { return uint8(math.Round(255 * math.Max(0, math.Min(1, v)))) }
