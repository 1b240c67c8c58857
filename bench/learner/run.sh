#!/usr/bin/env bash
# Side-by-side benchmark: TF-IDF word 1–2-grams + L2 logistic regression on
# the Debian package index (one-line descriptions → archive section), ours
# (learner.Logistic, Go) against scikit-learn (Debian python3-sklearn), same
# data, same seeded 80/20 split, one run. Writes RESULTS.md beside this file.
#
#   bash bench/learner/run.sh            # from the repository root
#
# Needs root for apt-get (the Debian package index and python3-sklearn).
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
work="${WORK:-$(mktemp -d /tmp/learner-bench.XXXXXX)}"
C="${C:-10}"              # both tools: sklearn C, ours lambda = 1/C
PEER_MAX_ITER="${PEER_MAX_ITER:-100}"   # scikit-learn's default max_iter

flock /tmp/apt.lock apt-get update -qq
if ! /usr/bin/python3 -c 'import sklearn' 2>/dev/null; then
  flock /tmp/apt.lock apt-get install -y -qq python3-sklearn >/dev/null
fi

# The corpus: every package in the index with its Description's first line
# and its Section (contrib/ and non-free/ prefixes stripped), seeded split.
apt-cache dumpavail | /usr/bin/python3 "$here/corpus.py" "$work" 1

(cd "$root" && go build -o "$work/learner-bench" ./bench/learner)
load_before=$(cut -d' ' -f1-3 /proc/loadavg)
ours=$("$work/learner-bench" -train "$work/train.tsv" -test "$work/test.tsv" -C "$C" -reps 10)
echo "ours: $ours"
peer=$(/usr/bin/python3 "$here/peer.py" "$work" "$C" "$PEER_MAX_ITER" 2>/dev/null)
echo "peer: $peer"

load_after=$(cut -d' ' -f1-3 /proc/loadavg)
/usr/bin/python3 - "$ours" "$peer" "$here/RESULTS.md" "$(nproc)" "$load_before" "$load_after" <<'PY'
import json, sys, datetime
o, p, out, cores = json.loads(sys.argv[1]), json.loads(sys.argv[2]), sys.argv[3], sys.argv[4]
load_before, load_after = sys.argv[5], sys.argv[6]
fit_ratio = p["fit_seconds"] / o["fit_seconds"]
score_ratio = o["score_texts_per_s"] / p["score_texts_per_s"]
acc_ok = o["accuracy"] >= p["accuracy"] - 0.005
rows = [
    ("fit seconds (TF-IDF fit + logistic fit)", f'{o["fit_seconds"]:.1f}', f'{p["fit_seconds"]:.1f}',
     f'{fit_ratio:.2f}× faster', "≥ 4× faster", "pass" if fit_ratio >= 4 else "short"),
    ("held-out accuracy", f'{o["accuracy"]:.4f}', f'{p["accuracy"]:.4f}',
     f'{o["accuracy"] - p["accuracy"]:+.4f}', "≥ peer − 0.005", "pass" if acc_ok else "short"),
    ("scoring texts/s (vectorise + predict_proba)", f'{o["score_texts_per_s"]:,.0f}', f'{p["score_texts_per_s"]:,.0f}',
     f'{score_ratio:.2f}×', "≥ 3×", "pass" if score_ratio >= 3 else "short"),
    ("of which predict_proba only, texts/s", f'{o["predict_only_texts_per_s"]:,.0f}', "", "", "", ""),
    ("fit CPU seconds (user + system, all threads)", f'{o["fit_cpu_seconds"]:.1f}', f'{p["fit_cpu_seconds"]:.1f}',
     f'{p["fit_cpu_seconds"] / o["fit_cpu_seconds"]:.2f}× less', "(context)", ""),
    ("scoring CPU seconds per pass over the test set", f'{o["score_cpu_seconds_per_rep"]:.3f}', f'{p["score_cpu_seconds_per_rep"]:.3f}',
     f'{p["score_cpu_seconds_per_rep"] / o["score_cpu_seconds_per_rep"]:.2f}× less', "(context)", ""),
]
with open(out, "w") as f:
    f.write("# Learner benchmark: TF-IDF + L2 logistic regression on the Debian package index\n\n")
    f.write(f"Run {datetime.datetime.utcnow():%Y-%m-%d %H:%M} UTC on {cores} cores by `bench/learner/run.sh` "
            "(both tools in one run, same data, same split; the machine is shared with other jobs — load average "
            f"{load_before} before, {load_after} after — so wall-clock figures move between runs). Scoring is the best of 10 "
            "repetitions for each tool; ours uses both cores, the peer one.\n\n")
    f.write(f'Data: `apt-cache dumpavail` → {o["train"] + o["test"]:,} packages, {o["classes"]} sections; '
            f'seeded 80/20 split ({o["train"]:,} train / {o["test"]:,} test). Features: word 1–2-grams, sublinear tf, '
            f'min_df 2, smoothed idf, L2 norm ({o["features"]:,} columns ours, {p["features"]:,} peer). '
            f'C = {o["C"]:g} (ours λ = 1/C).\n\n')
    f.write(f'Ours: learner.Logistic defaults (L-BFGS, Tol and MaxIter defaults): {o["iterations"]} iterations, '
            f'stop: {o["status"]}. Peer: {p["tool"]} LogisticRegression(C={p["C"]:g}, max_iter={p["max_iter"]}), '
            f'{p["iterations"]} iterations.\n\n')
    f.write("| figure | ours | peer | ratio | target | result |\n| --- | --- | --- | --- | --- | --- |\n")
    for r in rows:
        f.write("| " + " | ".join(r) + " |\n")
    f.write("\nRaw:\n\n```\nours " + json.dumps(o) + "\npeer " + json.dumps(p) + "\n```\n")
print(open(out).read())
PY
