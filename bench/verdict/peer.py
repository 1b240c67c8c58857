"""Peer for the verdict benchmark: scipy's exact Clopper-Pearson bounds
(scipy.stats.beta.ppf), compared with ours over the same (k, n) grid.
Usage: /usr/bin/python3 peer.py GRIDFILE"""
import sys
import time

import numpy as np
from scipy.stats import beta

rows = np.loadtxt(sys.argv[1])
k, n = rows[:, 0], rows[:, 1]
start = time.perf_counter()
lo = np.where(k > 0, beta.ppf(0.025, k, n - k + 1), 0.0)
hi = np.where(k < n, beta.ppf(0.975, k + 1, n - k), 1.0)
up = np.where(k < n, beta.ppf(0.95, k + 1, n - k), 1.0)
el = time.perf_counter() - start
diff = max(np.max(np.abs(lo - rows[:, 2])), np.max(np.abs(hi - rows[:, 3])), np.max(np.abs(up - rows[:, 4])))
print("peer_count", len(rows))
print("peer_seconds %.6f" % el)
print("max_abs_diff %.3g" % diff)
