#!/usr/bin/python3
"""The peer: vectorised numpy Dawid–Skene (Dawid & Skene 1979) and the same
model with the hierarchical prior our tool uses by default (crowd/hier.go),
on the labels written by gen/ (same file as ours). Written for this
benchmark, the way a competent numpy user would: integer index arrays built
once, every E- and M-step a handful of np.take + np.bincount passes per
class, arrays laid out so the per-class columns are contiguous, float64
throughout; the hierarchical M-step vectorised over annotators (the pooled
matrix, the skill equation solved by safeguarded Newton steps on all
annotators at once, DerSimonian–Laird, the row strength β by golden-section
search on a Dirichlet–multinomial likelihood evaluated with
scipy.special.gammaln).

It runs SKIP+ITERATIONS EM iterations with no early stop and times the last
ITERATIONS, as ours does (ours subtracts a SKIP-iteration run from a
SKIP+ITERATIONS one), so both time the same M-steps: for the hierarchical
model the first five iterations are one-coin ones (crowd/em.go's warm start)
and SKIP = 10 leaves them out.
Prints one JSON line: seconds per EM iteration (mean over the timed
iterations, setup excluded), peak RSS, accuracy against the generated truth,
the log-likelihood at the end.

usage: peer_ds.py FILE ITERATIONS [dawid-skene|hierarchical [SKIP]]
"""
import json
import math
import resource
import sys
import time

import numpy as np

try:
    from scipy.special import gammaln
    import scipy
    GAMMALN = "scipy.special.gammaln " + scipy.__version__
except ImportError:  # slower, same figures
    gammaln = np.vectorize(math.lgamma, otypes=[np.float64])
    GAMMALN = "math.lgamma via np.vectorize"

HIER_MAX_EB = 4000  # annotators used for β, as ours
HIER_WARM = 5       # one-coin iterations before the hierarchical M-steps, as ours


def sigmoid(x):
    return 1.0 / (1.0 + np.exp(-x))


def skill_fit(nt, right, L, Lbar):
    """Solve Σ_t nt[a,t]·σ(L_t+δ) + σ(L̄+δ) = right[a] for every annotator a
    by safeguarded Newton steps (bisection when a step leaves the bracket),
    all annotators at once; returns δ and 1/I(δ)."""
    na = nt.shape[0]
    lo = np.full(na, -20.0)
    hi = np.full(na, 20.0)
    d = np.zeros(na)
    act = np.ones(na, dtype=bool)

    def f(d, nt):
        s = sigmoid(L[None, :] + d[:, None])
        sb = sigmoid(Lbar + d)
        g = (nt * s).sum(1) + sb
        dg = (nt * s * (1 - s)).sum(1) + sb * (1 - sb)
        return g, dg

    for _ in range(60):
        idx = np.flatnonzero(act)
        if idx.size == 0:
            break
        dd = d[idx]
        g, dg = f(dd, nt[idx])
        g -= right[idx]
        pos = g > 0
        h, l = hi[idx], lo[idx]
        h = np.where(pos, dd, h)
        l = np.where(pos, l, dd)
        done = np.abs(g) < 1e-10
        with np.errstate(divide="ignore", invalid="ignore"):
            nd = dd - g / dg
        bad = ~((nd > l) & (nd < h)) | (dg <= 0)
        nd = np.where(bad, (l + h) / 2, nd)
        nd = np.where(done, dd, nd)
        hi[idx], lo[idx], d[idx] = h, l, nd
        act[idx] = ~done & (h - l >= 1e-12)
    _, dg = f(d, nt)
    return d, 1.0 / dg


def hier_beta(c3, mu, na, k):
    """β by golden-section search on log2 β over [−1, 12] to within 0.05 of
    the Dirichlet–multinomial marginal likelihood of the rows, on at most
    4,000 annotators spread evenly over the index (as ours)."""
    step = max(1, (na + HIER_MAX_EB - 1) // HIER_MAX_EB)
    use = np.arange(0, na, step)
    X = np.ascontiguousarray(c3[:, use, :].transpose(1, 0, 2))  # [a, t, c]
    M = mu[use]                                                  # [a, t, c]
    pos = X > 0
    Xp, Mp = X[pos], M[pos]
    n = X.sum(2)
    npos = n[n > 0]

    def score(lb):
        b = 2.0 ** lb
        bm = b * Mp
        s = (gammaln(Xp + bm) - gammaln(bm)).sum()
        return s + npos.size * float(gammaln(b)) - gammaln(npos + b).sum()

    gr = 0.6180339887498949
    lo, hi = -1.0, 12.0
    x1, x2 = hi - gr * (hi - lo), lo + gr * (hi - lo)
    f1, f2 = score(x1), score(x2)
    while hi - lo > 0.05:
        if f1 >= f2:
            hi, x2, f2 = x2, x1, f1
            x1 = hi - gr * (hi - lo)
            f1 = score(x1)
        else:
            lo, x1, f1 = x1, x2, f2
            x2 = lo + gr * (hi - lo)
            f2 = score(x2)
    return 2.0 ** ((lo + hi) / 2)


def main():
    path, iters = sys.argv[1], int(sys.argv[2])
    model = sys.argv[3] if len(sys.argv) > 3 else "dawid-skene"
    skip = int(sys.argv[4]) if len(sys.argv) > 4 else 1
    if model not in ("dawid-skene", "hierarchical"):
        sys.exit(f"peer_ds.py: model {model!r}: want dawid-skene or hierarchical")
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
    eye = np.eye(k, dtype=bool)
    state = {"beta": None, "hier": None}

    def counts_of(T):
        counts = np.empty((k, na * k))           # [true t, annotator·k + given c]
        for t in range(k):
            counts[t] = np.bincount(ac, weights=np.take(T[t], item), minlength=na * k)
        return counts.reshape(k, na, k)          # [t, a, c]

    def mstep_ds(T):
        prior = T[:, labelled].sum(1) / n_lab
        c3 = counts_of(T)
        tot = c3.sum(2, keepdims=True)
        pi = c3 / np.where(tot > 0, tot, 1.0)
        pi[np.broadcast_to(tot == 0, pi.shape)] = 1.0 / k
        logpi = np.log(np.maximum(pi, 1e-300)).reshape(k, na * k)
        return np.log(np.maximum(prior, 1e-300)), logpi

    def mstep_onecoin(T):
        # One accuracy per annotator: q_a = Σ diagonal / Σ all (1/K without labels).
        prior = T[:, labelled].sum(1) / n_lab
        c3 = counts_of(T)
        diag = np.einsum("tat->a", c3)
        tot = c3.sum((0, 2))
        q = np.where(tot > 0, diag / np.where(tot > 0, tot, 1.0), 1.0 / k)
        pi = np.broadcast_to(((1 - q) / (k - 1))[None, :, None], (k, na, k)).copy()
        ti = np.arange(k)
        pi[ti, :, ti] = q[None, :]
        logpi = np.log(np.maximum(pi, 1e-300)).reshape(k, na * k)
        return np.log(np.maximum(prior, 1e-300)), logpi

    def dersimonian_laird(y, v):
        # Random-effects mean and τ² (DerSimonian & Laird 1986), as ours.
        w = 1 / v
        sw, sw2 = w.sum(), (w * w).sum()
        if y.size == 0 or sw == 0:
            return 0.0, 0.0
        fe = (w * y).sum() / sw
        q = (w * (y - fe) ** 2).sum()
        tau2 = max(0.0, (q - (y.size - 1)) / (sw - sw2 / sw)) if y.size > 1 and sw - sw2 / sw > 0 else 0.0
        wr = 1 / (v + tau2)
        return float((wr * y).sum() / wr.sum()), tau2

    def mstep_hier(T):
        # crowd/hier.go steps 1–6.
        prior = T[:, labelled].sum(1) / n_lab
        c3 = counts_of(T)                        # [t, a, c]
        nt = c3.sum(2).T                         # [a, t]
        right = np.einsum("tat->a", c3)
        P = c3.sum(1)                            # pooled counts [t, c]
        m = (P + 1 + eye) / (P.sum(1, keepdims=True) + k + 1)
        L = np.log(np.diag(m) / (1 - np.diag(m)))
        Lbar = float(prior @ L)
        has = nt.sum(1) > 0
        y = np.zeros(na)
        v = np.full(na, np.inf)
        y[has], v[has] = skill_fit(nt[has], right[has] + 0.5, L, Lbar)
        if state["hier"] is None:  # τ² and δ̄ once, in the first hierarchical M-step
            mean, tau2 = dersimonian_laird(y[has], v[has])
        else:
            mean, tau2 = state["hier"]["skill_mean"], state["hier"]["skill_sd"] ** 2
        skill = np.full(na, mean)
        if tau2 > 0:
            skill[has] = mean + (y[has] - mean) * tau2 / (tau2 + v[has])
        s = sigmoid(L[None, :] + skill[:, None])                 # [a, t]
        off = (1 - s) / (1 - np.diag(m))[None, :]
        mu = off[:, :, None] * m[None, :, :]                     # [a, t, c]
        ti = np.arange(k)
        mu[:, ti, ti] = s
        if state["hier"] is None:  # β once too, then held
            state["beta"] = hier_beta(c3, mu, na, k)
        b = state["beta"]
        state["hier"] = {"beta": b, "skill_mean": mean, "skill_sd": math.sqrt(tau2)}
        pi = (c3 + b * mu.transpose(1, 0, 2)) / (nt.T[:, :, None] + b)  # [t, a, c]
        logpi = np.log(np.maximum(pi, 1e-300)).reshape(k, na * k)
        return np.log(np.maximum(prior, 1e-300)), logpi

    warm = 0
    if model == "hierarchical":
        warm = min(HIER_WARM, skip + iters - 1)

    def mstep(T, it):
        if model == "dawid-skene":
            return mstep_ds(T)
        return mstep_onecoin(T) if it <= warm else mstep_hier(T)

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
    logprior, logpi = mstep(T, 0)
    ll = None
    cpu0 = cpu()
    for it in range(1, skip + iters + 1):
        if it == skip + 1:
            cpu0 = cpu()
        t0 = time.perf_counter()
        T, ll = estep(logprior, logpi)
        logprior, logpi = mstep(T, it)
        if it > skip:
            times.append(time.perf_counter() - t0)
    cpu_iter = (cpu() - cpu0) / iters
    T, ll = estep(logprior, logpi)
    acc = float((T.argmax(0) == truth).mean())
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    out = {
        "tool": "numpy-peer", "numpy": np.__version__, "model": model, "labels": n, "items": ni,
        "annotators": na, "classes": k, "iterations": iters, "skipped": skip,
        "seconds_setup": setup, "seconds_per_iter": sum(times) / len(times),
        "cpu_seconds_per_iter": cpu_iter,
        "peak_rss_mb": peak, "accuracy_model": acc, "log_likelihood": ll,
    }
    if model == "hierarchical":
        out["hier"] = state["hier"]
        out["gammaln"] = GAMMALN
    print(json.dumps(out))


if __name__ == "__main__":
    main()
