"""scikit-learn peer: TF-IDF word 1-2-grams + LogisticRegression on the same
split as our Go bench (train.tsv / test.tsv: label TAB text). Prints JSON."""
import json
import sys
import time

import sklearn
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression


def read(path):
    ys, xs = [], []
    with open(path) as f:
        for line in f:
            y, _, x = line.rstrip("\n").partition("\t")
            ys.append(y)
            xs.append(x)
    return ys, xs


def main():
    d, C, max_iter = sys.argv[1], float(sys.argv[2]), int(sys.argv[3])
    ytr, xtr = read(f"{d}/train.tsv")
    yte, xte = read(f"{d}/test.tsv")
    t0, c0 = time.perf_counter(), time.process_time()
    vec = TfidfVectorizer(ngram_range=(1, 2), sublinear_tf=True, min_df=2)
    X = vec.fit_transform(xtr)
    vec_s = time.perf_counter() - t0
    clf = LogisticRegression(C=C, max_iter=max_iter)
    clf.fit(X, ytr)
    fit_s = time.perf_counter() - t0
    fit_cpu = time.process_time() - c0
    best = None
    c1 = time.process_time()
    for _ in range(10):
        t1 = time.perf_counter()
        P = clf.predict_proba(vec.transform(xte))
        s = time.perf_counter() - t1
        best = s if best is None or s < best else best
    score_cpu = (time.process_time() - c1) / 10
    pred = clf.classes_[P.argmax(axis=1)]
    acc = sum(p == y for p, y in zip(pred, yte)) / len(yte)
    print(json.dumps({
        "tool": "scikit-learn " + sklearn.__version__, "train": len(xtr), "test": len(xte),
        "classes": len(clf.classes_), "features": X.shape[1], "C": C, "max_iter": max_iter,
        "iterations": int(clf.n_iter_[0]), "vectorise_seconds": vec_s, "fit_seconds": fit_s, "fit_cpu_seconds": fit_cpu,
        "score_cpu_seconds_per_rep": score_cpu,
        "accuracy": acc, "score_texts_per_s": len(xte) / best,
    }))


main()
