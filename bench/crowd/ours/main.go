// Command ours times our consensus on the file written by ../gen and prints
// one JSON line. With -method auto (the default, as in the tool) it first
// runs crowd.Auto as the tool does (the model choice on a sample of items,
// then the chosen model to convergence) and times the chosen model alone
// with the same options: the difference is the time the choice took. Then
// it times the model used (for auto: the one chosen) per EM iteration: one
// run of 1 iteration and one of -iters+1 iterations, no early stop; the
// difference over -iters is the time of an iteration without setup. Also:
// peak RSS, the accuracy of the model and of majority vote against the
// generated truth.
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
	iters := flag.Int("iters", 10, "EM iterations to time (no early stop)")
	skip := flag.Int("skip", 10, "EM iterations run before the timed ones (at least the hierarchical model's warm-up)")
	workers := flag.Int("workers", 0, "EM goroutines (0: the package default)")
	prof := flag.String("cpuprofile", "", "write a CPU profile of the timed EM runs to this file")
	method := flag.String("method", crowd.MethodAuto, "consensus method: auto (the tool's default), hierarchical, dawid-skene, one-coin or majority")
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
	out := map[string]any{"tool": "ours", "labels": n, "items": ni, "annotators": na, "classes": k,
		"iterations": *iters, "gomaxprocs": runtime.GOMAXPROCS(0), "method": *method}
	model := *method
	if *method == crowd.MethodAuto {
		opts := crowd.Options{Seed: 1, Workers: *workers}
		t0 := time.Now()
		r, err := crowd.Auto(l, opts)
		if err != nil {
			fail(err)
		}
		all := time.Since(t0).Seconds()
		model = r.Choice.Chosen
		runtime.GC()
		t1 := time.Now()
		rf, err := crowd.Combine(model, l, opts)
		if err != nil {
			fail(err)
		}
		fit := time.Since(t1).Seconds()
		same := 0
		for i := range r.Class {
			if r.Class[i] == rf.Class[i] {
				same++
			}
		}
		out["auto"] = map[string]any{"seconds": all, "seconds_fit": fit, "seconds_choice": all - fit,
			"chosen": model, "reason": r.Choice.Reason, "candidates": r.Choice.Candidates,
			"sample_items": r.Choice.SampleItems, "held_out": r.Choice.HeldOut, "warning": r.Choice.Warning,
			"iterations": r.Iterations, "converged": r.Converged, "accuracy": accuracy(r.Class, truth),
			"same_classes_as_fit": float64(same) / float64(len(r.Class)), "log_likelihood": r.LogLik}
		r, rf = nil, nil
		runtime.GC()
	}
	out["model"] = model
	if model != crowd.MethodMajority {
		// A -skip-iteration run first: its time (input checks, sorting the
		// labels into cache blocks, the initial M-step, the first
		// iterations, the final E-step) subtracted from the full run's
		// leaves the time of the last -iters iterations, measured the way
		// the peer's are.
		c1, t1 := cpuSeconds(), time.Now()
		if _, err := crowd.Combine(model, l, crowd.Options{MaxIter: *skip, Tol: -1, Workers: *workers}); err != nil {
			fail(err)
		}
		el1, cpuOne := time.Since(t1).Seconds(), cpuSeconds()-c1
		runtime.GC()
		cpu0 := cpuSeconds()
		t0 := time.Now()
		r, err := crowd.Combine(model, l, crowd.Options{MaxIter: *skip + *iters, Tol: -1, Workers: *workers})
		if err != nil {
			fail(err)
		}
		el := time.Since(t0).Seconds()
		cpu := cpuSeconds() - cpu0
		out["skipped"] = *skip
		out["seconds_total"] = el
		out["seconds_skip_run"] = el1
		out["seconds_per_iter"] = (el - el1) / float64(*iters)
		// Whole call divided by its iterations: the conservative figure.
		out["seconds_per_iter_with_setup"] = el / float64(r.Iterations)
		out["cpu_seconds_per_iter"] = (cpu - cpuOne) / float64(*iters)
		out["log_likelihood"] = r.LogLik
		out["accuracy_model"] = accuracy(r.Class, truth)
		if r.Hier != nil {
			out["hier"] = map[string]any{"beta": r.Hier.Beta, "skill_mean": r.Hier.SkillMean, "skill_sd": r.Hier.SkillSD}
		}
		r = nil
		runtime.GC()
	}
	if *prof != "" {
		pprof.StopCPUProfile()
	}
	mv, err := crowd.Majority(l, crowd.Options{Seed: 1})
	if err != nil {
		fail(err)
	}
	out["accuracy_majority"] = accuracy(mv.Class, truth)
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	out["peak_rss_mb"] = float64(ru.Maxrss) / 1024
	if err := json.NewEncoder(os.Stdout).Encode(out); err != nil {
		fail(err)
	}
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
