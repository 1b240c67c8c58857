#!/usr/bin/python3
"""The peer: a vectorised numpy Dawid–Skene (Dawid & Skene 1979) on the labels
written by gen/ (same file as ours). Written for this benchmark, the way a
competent numpy user would: integer index arrays built once, every E- and
M-step a handful of np.take + np.bincount passes per class, arrays laid out
so the per-class columns are contiguous, float64 throughout.

Prints one JSON line: seconds per EM iteration (mean over the iterations,
setup excluded), peak RSS, accuracy against the generated truth.

usage: peer_ds.py FILE ITERATIONS
"""
import json
import resource
import sys
import time

import numpy as np


def main():
    path, iters = sys.argv[1], int(sys.argv[2])
    with open(path, "rb") as f:
        n, ni, na, k = (int(x) for x in np.frombuffer(f.read(32), dtype="<i8"))
    off = 32
    item = np.fromfile(path, dtype="<i4", count=n, offset=off); off += 4 * n
    ann = np.fromfile(path, dtype="<i4", count=n, offset=off); off += 4 * n
    cls = np.fromfile(path, dtype="u1", count=n, offset=off); off += n
    truth = np.fromfile(path, dtype="u1", count=ni, offset=off)

    t_setup = time.perf_counter()
    item = item.astype(np.intp)              # bincount/take want intp: convert once
    ac = ann.astype(np.intp) * k + cls       # (annotator, given class) row index
    del ann
    nlab = np.bincount(item, minlength=ni)
    labelled = nlab > 0
    n_lab = int(labelled.sum())

    # Start: each item's share of labels per class (their eq. 3.1). T is
    # stored class-major (k × items) so each class's column is contiguous.
    T = np.empty((k, ni))
    for c in range(k):
        T[c] = np.bincount(item, weights=(cls == c).astype(np.float64), minlength=ni)
    T /= np.maximum(nlab, 1)
    del cls
    setup = time.perf_counter() - t_setup

    def mstep(T):
        prior = T[:, labelled].sum(1) / n_lab
        counts = np.empty((k, na * k))           # [true t, annotator·k + given c]
        for t in range(k):
            counts[t] = np.bincount(ac, weights=np.take(T[t], item), minlength=na * k)
        c3 = counts.reshape(k, na, k)            # [t, a, c]
        tot = c3.sum(2, keepdims=True)
        pi = c3 / np.where(tot > 0, tot, 1.0)
        pi[np.broadcast_to(tot == 0, pi.shape)] = 1.0 / k
        logpi = np.log(np.maximum(pi, 1e-300)).reshape(k, na * k)
        return np.log(np.maximum(prior, 1e-300)), logpi

    def estep(logprior, logpi):
        S = np.empty((k, ni))
        for t in range(k):
            S[t] = np.bincount(item, weights=np.take(logpi[t], ac), minlength=ni)
        S += logprior[:, None]
        m = S.max(0)
        S -= m
        np.exp(S, out=S)
        z = S.sum(0)
        S /= z
        ll = float((m + np.log(z))[labelled].sum())
        return S, ll

    def cpu():
        r = resource.getrusage(resource.RUSAGE_SELF)
        return r.ru_utime + r.ru_stime

    times = []
    logprior, logpi = mstep(T)
    cpu0 = cpu()
    ll = None
    for _ in range(iters):
        t0 = time.perf_counter()
        T, ll = estep(logprior, logpi)
        logprior, logpi = mstep(T)
        times.append(time.perf_counter() - t0)
    cpu_iter = (cpu() - cpu0) / iters
    T, ll = estep(logprior, logpi)
    acc = float((T.argmax(0) == truth).mean())
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({
        "tool": "numpy-peer", "numpy": np.__version__, "labels": n, "items": ni,
        "annotators": na, "classes": k, "iterations": iters,
        "seconds_setup": setup, "seconds_per_iter": sum(times) / len(times),
        "cpu_seconds_per_iter": cpu_iter,
        "peak_rss_mb": peak, "accuracy_ds": acc, "log_likelihood": ll,
    }))


if __name__ == "__main__":
    main()
