// Command gen writes a simulated crowd to a binary file that both the Go
// benchmark (../ours) and the numpy peer (../peer_ds.py) read, so that
// generation stays out of the timing.
//
// File layout, little-endian: int64 nLabels, nItems, nAnnotators, nClasses,
// then int32 item[nLabels], int32 annotator[nLabels], uint8 class[nLabels],
// uint8 truth[nItems]. Labels are written sorted by item.
//
// The crowd: true classes drawn from the prior (0.35, 0.25, 0.20, 0.12, 0.08);
// each item gets labels from distinct annotators drawn uniformly; 70% of
// annotators are "fair" (accuracy uniform in [0.35, 0.75], errors falling on
// the neighbouring classes twice as often as on the others), 20% are
// spammers (uniform random answers) and 10% are biased (answer their
// favourite class half the time, otherwise like a fair annotator). Invented
// data for benchmarking only.
package main

import (
	"bufio"
	"encoding/binary"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"unsafe"
)

func main() {
	out := flag.String("o", "/tmp/crowd-bench.bin", "output file")
	nItems := flag.Int("items", 1_000_000, "items")
	nAnn := flag.Int("annotators", 100_000, "annotators")
	perItem := flag.Int("per-item", 40, "labels per item")
	seed := flag.Uint64("seed", 1, "seed")
	flag.Parse()
	const k = 5
	prior := []float64{0.35, 0.25, 0.20, 0.12, 0.08}
	rng := rand.New(rand.NewPCG(*seed, 2))
	// Cumulative confusion rows per annotator: [a][true][given].
	cum := make([]float32, *nAnn*k*k)
	for a := 0; a < *nAnn; a++ {
		u := rng.Float64()
		var fav = -1
		if u >= 0.9 {
			fav = rng.IntN(k)
		}
		acc := 0.35 + 0.4*rng.Float64()
		for t := 0; t < k; t++ {
			row := make([]float64, k)
			if u >= 0.7 && u < 0.9 {
				for c := range row {
					row[c] = 1.0 / k
				}
			} else {
				var w float64
				for c := 0; c < k; c++ {
					if c != t {
						x := 1.0
						if c == t-1 || c == t+1 {
							x = 2
						}
						row[c] = x
						w += x
					}
				}
				for c := range row {
					row[c] *= (1 - acc) / w
				}
				row[t] = acc
				if fav >= 0 {
					for c := range row {
						row[c] *= 0.5
					}
					row[fav] += 0.5
				}
			}
			var s float64
			for c := 0; c < k; c++ {
				s += row[c]
				cum[(a*k+t)*k+c] = float32(s)
			}
			cum[(a*k+t)*k+k-1] = 1
		}
	}
	n := *nItems * *perItem
	item := make([]int32, n)
	ann := make([]int32, n)
	cls := make([]uint8, n)
	truth := make([]uint8, *nItems)
	chosen := make([]int32, 0, *perItem)
	j := 0
	for i := 0; i < *nItems; i++ {
		u := rng.Float64()
		t := 0
		for s := prior[0]; u > s && t < k-1; {
			t++
			s += prior[t]
		}
		truth[i] = uint8(t)
		chosen = chosen[:0]
	pick:
		for len(chosen) < *perItem {
			a := int32(rng.IntN(*nAnn))
			for _, b := range chosen {
				if a == b {
					continue pick
				}
			}
			chosen = append(chosen, a)
		}
		for _, a := range chosen {
			row := cum[(int(a)*k+t)*k:][:k]
			v := rng.Float32()
			c := 0
			for c < k-1 && v > row[c] {
				c++
			}
			item[j], ann[j], cls[j] = int32(i), a, uint8(c)
			j++
		}
	}
	f, err := os.Create(*out)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	for _, v := range []int64{int64(n), int64(*nItems), int64(*nAnn), k} {
		binary.Write(w, binary.LittleEndian, v)
	}
	w.Write(unsafe.Slice((*byte)(unsafe.Pointer(&item[0])), 4*n))
	w.Write(unsafe.Slice((*byte)(unsafe.Pointer(&ann[0])), 4*n))
	w.Write(cls)
	w.Write(truth)
	if err := w.Flush(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	if err := f.Close(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	fmt.Fprintf(os.Stderr, "gen: wrote %d labels, %d items, %d annotators to %s\n", n, *nItems, *nAnn, *out)
}
