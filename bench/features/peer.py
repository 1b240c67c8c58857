"""The peer side of bench/features: scikit-learn's TfidfVectorizer on the same
texts, and a scikit-image / Pillow / numpy pipeline computing the same kinds of
image features as package features on the same PNGs. Prints one JSON object.

usage: peer.py TEXTS.txt PNG_DIR
"""
import glob
import json
import os
import sys
import time

import numpy as np
from PIL import Image
from sklearn.feature_extraction.text import TfidfVectorizer

out = {}
texts = open(sys.argv[1], encoding="utf-8").read().split("\n")
if texts and texts[-1] == "":
    texts.pop()

# Text: word 1-2-grams, sublinear tf, smoothed idf, l2, min_df 2.
best, best_cpu = float("inf"), float("inf")
for _ in range(3):
    t0, c0 = time.perf_counter(), time.process_time()
    vec = TfidfVectorizer(ngram_range=(1, 2), sublinear_tf=True, min_df=2)
    vec.fit(texts)
    best = min(best, time.perf_counter() - t0)
    best_cpu = min(best_cpu, time.process_time() - c0)
out["text_fit_s"] = best
out["text_fit_cpu_s"] = best_cpu
out["vocabulary"] = len(vec.vocabulary_)
best, best_cpu = float("inf"), float("inf")
for _ in range(3):
    t0, c0 = time.perf_counter(), time.process_time()
    X = vec.transform(texts)
    best = min(best, time.perf_counter() - t0)
    best_cpu = min(best_cpu, time.process_time() - c0)
out["text_transform_per_s"] = len(texts) / best
out["text_transform_per_cpu_s"] = len(texts) / best_cpu
out["text_nnz"] = int(X.nnz)

# Images: decode, resize to 64x64, then colour statistics in RGB and HSV,
# intensity histogram, moments and Hu invariants, light concentration,
# asymmetry, Gini, GLCM properties at four angles, Sobel edges and HOG.
try:
    from skimage.feature import graycomatrix, graycoprops, hog
    from skimage.filters import sobel
    from skimage.measure import moments_central, moments_hu, moments_normalized
except ImportError:
    graycomatrix = None

paths = sorted(glob.glob(os.path.join(sys.argv[2], "*.png")))


def feats(path):
    img = Image.open(path).convert("RGB").resize((64, 64), Image.BILINEAR)
    rgb = np.asarray(img, dtype=np.float64) / 255
    hsv = np.asarray(img.convert("HSV"), dtype=np.float64) / 255
    f = []
    for ch in list(rgb.transpose(2, 0, 1)) + list(hsv.transpose(2, 0, 1)):
        f += [ch.mean(), ch.std(), *np.percentile(ch, [10, 50, 90])]
    f += [rgb[..., 2].mean() - rgb[..., 0].mean(), rgb[..., 1].mean() - rgb[..., 0].mean()]
    gray = rgb @ np.array([0.299, 0.587, 0.114])
    f += list(np.histogram(gray, bins=16, range=(0, 1))[0] / gray.size)
    mu = moments_central(gray)
    f += list(moments_hu(moments_normalized(mu)))
    m00 = gray.sum()
    yy, xx = np.indices(gray.shape)
    cy, cx = (yy * gray).sum() / m00, (xx * gray).sum() / m00
    r = np.hypot(yy - cy, xx - cx).ravel()
    order = np.argsort(r)
    cum = np.cumsum(gray.ravel()[order])
    r20 = r[order][np.searchsorted(cum, 0.2 * m00)]
    r80 = r[order][np.searchsorted(cum, 0.8 * m00)]
    f += [r20, r80, r80 / max(r20, 0.5)]
    f += [np.abs(gray - np.rot90(gray, 2)).sum() / (2 * m00)]
    s = np.sort(gray.ravel())
    n = s.size
    f += [((2 * np.arange(1, n + 1) - n - 1) * s).sum() / (s.mean() * n * (n - 1))]
    q = np.minimum((gray * 8).astype(np.uint8), 7)
    P = graycomatrix(q, [1], [0, np.pi / 4, np.pi / 2, 3 * np.pi / 4], levels=8, symmetric=True, normed=True)
    for prop in ["contrast", "dissimilarity", "homogeneity", "ASM", "energy", "correlation"]:
        f += list(graycoprops(P, prop).ravel())
    e = sobel(gray)
    f += [(e > 0.125).mean(), e.mean()]
    f += list(hog(gray, orientations=9, pixels_per_cell=(32, 32), cells_per_block=(2, 2)))
    return f


if graycomatrix is not None and paths:
    best, best_cpu = float("inf"), float("inf")
    for _ in range(2):
        t0, c0 = time.perf_counter(), time.process_time()
        for p in paths:
            feats(p)
        best = min(best, time.perf_counter() - t0)
        best_cpu = min(best_cpu, time.process_time() - c0)
    out["images"] = len(paths)
    out["image_features"] = len(feats(paths[0]))
    out["images_per_s_1core"] = len(paths) / best
    out["images_per_cpu_s_1core"] = len(paths) / best_cpu

import sklearn
out["sklearn"] = sklearn.__version__
json.dump(out, sys.stdout)
print()
