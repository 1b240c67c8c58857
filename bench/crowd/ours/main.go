// Command ours times crowd.DawidSkene on the file written by ../gen and
// prints one JSON line: seconds per EM iteration, peak RSS, and the accuracy
// of Dawid–Skene and of majority vote against the generated truth.
package main

import (
	"encoding/binary"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"runtime"
	"runtime/pprof"
	"syscall"
	"time"
	"unsafe"

	"handoff/crowd"
)

func main() {
	in := flag.String("i", "/tmp/crowd-bench.bin", "input file")
	iters := flag.Int("iters", 10, "EM iterations to run (no early stop)")
	workers := flag.Int("workers", 0, "EM goroutines (0: the package default)")
	prof := flag.String("cpuprofile", "", "write a CPU profile of the EM run to this file")
	flag.Parse()
	f, err := os.Open(*in)
	if err != nil {
		fail(err)
	}
	var hdr [4]int64
	if err := binary.Read(f, binary.LittleEndian, &hdr); err != nil {
		fail(err)
	}
	n, ni, na, k := int(hdr[0]), int(hdr[1]), int(hdr[2]), int(hdr[3])
	l := &crowd.Labels{Item: make([]int32, n), Annotator: make([]int32, n), Class: make([]uint8, n),
		NItems: ni, NAnnotators: na, NClasses: k}
	truth := make([]uint8, ni)
	for _, b := range [][]byte{
		unsafe.Slice((*byte)(unsafe.Pointer(&l.Item[0])), 4*n),
		unsafe.Slice((*byte)(unsafe.Pointer(&l.Annotator[0])), 4*n),
		l.Class, truth,
	} {
		if _, err := io.ReadFull(f, b); err != nil {
			fail(err)
		}
	}
	f.Close()
	if *prof != "" {
		pf, err := os.Create(*prof)
		if err != nil {
			fail(err)
		}
		pprof.StartCPUProfile(pf)
	}
	// A one-iteration run first: its time (input checks, sorting the labels
	// into cache blocks, the initial M-step, one iteration, the final E-step)
	// subtracted from the full run's leaves the time of the other iterations,
	// measured the way the peer's is (setup excluded).
	c1, t1 := cpuSeconds(), time.Now()
	if _, err := crowd.DawidSkene(l, crowd.Options{MaxIter: 1, Tol: -1, Workers: *workers}); err != nil {
		fail(err)
	}
	el1, cpuOne := time.Since(t1).Seconds(), cpuSeconds()-c1
	runtime.GC()
	cpu0 := cpuSeconds()
	t0 := time.Now()
	r, err := crowd.DawidSkene(l, crowd.Options{MaxIter: *iters + 1, Tol: -1, Workers: *workers})
	if *prof != "" {
		pprof.StopCPUProfile()
	}
	if err != nil {
		fail(err)
	}
	el := time.Since(t0).Seconds()
	cpu := cpuSeconds() - cpu0
	// Whole call divided by its iterations: the conservative figure.
	perIterAll := el / float64(r.Iterations)
	perIter := (el - el1) / float64(*iters)
	cpuPerIter := (cpu - cpuOne) / float64(*iters)
	accDS := accuracy(r.Class, truth)
	ll := r.LogLik
	r = nil
	runtime.GC()
	mv, err := crowd.Majority(l, crowd.Options{Seed: 1})
	if err != nil {
		fail(err)
	}
	accMV := accuracy(mv.Class, truth)
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	json.NewEncoder(os.Stdout).Encode(map[string]any{
		"tool": "ours", "labels": n, "items": ni, "annotators": na, "classes": k,
		"iterations": *iters, "seconds_total": el, "seconds_setup_and_one_iter": el1,
		"seconds_per_iter": perIter, "seconds_per_iter_with_setup": perIterAll,
		"cpu_seconds_per_iter": cpuPerIter, "log_likelihood": ll,
		"peak_rss_mb": float64(ru.Maxrss) / 1024, "accuracy_ds": accDS, "accuracy_majority": accMV,
		"gomaxprocs": runtime.GOMAXPROCS(0),
	})
}

// cpuSeconds is the user plus system CPU time of the process so far.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}

func accuracy(class []int, truth []uint8) float64 {
	var ok int
	for i, c := range class {
		if c == int(truth[i]) {
			ok++
		}
	}
	return float64(ok) / float64(len(truth))
}

func fail(err error) {
	fmt.Fprintln(os.Stderr, "ours:", err)
	os.Exit(1)
}
