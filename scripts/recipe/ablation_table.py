#!/usr/bin/python3
"""Markdown table of a recipe ablation written by scripts/recipe/ablation.sh.

  python3 scripts/recipe/ablation_table.py OUTDIR

For each configuration: test accuracy (1 window per clip, so window and
clip accuracy coincide) of the float model and of its int8 model, mean and
sample standard deviation over every (fold, seed) run, the int8 - float
gap, the margin over "today" in units of the larger of the two spreads, the
paired difference (same seed and fold, so the same split) mean ± sd,
and the mean training time per epoch and per fold model (from
MODEL.log.csv; wall time on a shared machine, indicative only). Standard library only.
"""
import csv
import glob
import json
import os
import statistics
import sys

out = sys.argv[1]
order = ["today", "mixup", "smooth", "wd1e-3", "constant-lr", "balanced",
         "long-cosine", "long-constant", "long-constant+mixup", "long-constant+smooth",
         "long-constant+balanced", "new-default", "new-default+wd1e-3", "new-default+distill"]
names = [n for n in order if os.path.isdir(os.path.join(out, "runs", n))]
names += sorted(set(os.listdir(os.path.join(out, "runs"))) - set(names))


def collect(name):
    fl, i8, ep, keys = [], [], [], []
    runs = 0
    for q in sorted(glob.glob(os.path.join(out, "runs", name, "seed*", "q[0-4].json"))):
        try:
            r = json.load(open(q))
        except (ValueError, OSError):
            continue
        fl.append(r["float_accuracy"])
        i8.append(r["int8_accuracy"])
        keys.append(os.path.relpath(q, os.path.join(out, "runs", name)))
    for log in glob.glob(os.path.join(out, "runs", name, "seed*", "m.pnet.fold[0-4].log.csv")):
        runs += 1
        for row in csv.DictReader(open(log)):
            ep.append(float(row["seconds"]))
    return fl, i8, ep, keys, runs


def paired(a, b):
    """Mean and sd of the differences a - b over runs of the same seed and fold."""
    da = dict(zip(a[3], a[0]))
    d = [da[k] - v for k, v in zip(b[3], b[0]) if k in da]
    m, s = ms(d)
    return m, s, len(d)


def ms(v):
    if len(v) < 2:
        return (v[0] if v else float("nan")), 0.0
    return statistics.mean(v), statistics.stdev(v)


rows = {n: collect(n) for n in names}
base = rows.get("today")
print("| recipe | runs | float accuracy | int8 accuracy | int8 − float | float margin over today (× sd) | int8 margin (× sd) | paired float difference | s per epoch | s per model |")
print("|---|---|---|---|---|---|---|---|---|---|")
for n in names:
    fl, i8, ep, _, runs = rows[n]
    if not fl:
        continue
    (mf, sf), (mi, si) = ms(fl), ms(i8)
    marg = ["", ""]
    if base and base[0] and n != "today":
        (bf, bsf), (bi, bsi) = ms(base[0]), ms(base[1])
        marg = ["%+.1f pt (%+.1f)" % (100 * (mf - bf), (mf - bf) / max(sf, bsf, 1e-9)),
                "%+.1f pt (%+.1f)" % (100 * (mi - bi), (mi - bi) / max(si, bsi, 1e-9))]
    pd = ""
    if base and base[0] and n != "today":
        m, sd, k = paired(rows[n], base)
        pd = "%+.1f ± %.1f pt (%d pairs)" % (100 * m, 100 * sd, k)
    print("| %s | %d | %.1f ± %.1f %% | %.1f ± %.1f %% | %+.1f pt | %s | %s | %s | %.2f | %.0f |" % (
        n, len(fl), 100 * mf, 100 * sf, 100 * mi, 100 * si, 100 * (mi - mf), marg[0], marg[1], pd,
        statistics.mean(ep) if ep else float("nan"), sum(ep) / runs if runs else float("nan")))
print()
for t in sorted(glob.glob(os.path.join(out, "teacher", "seed*", "cv.json"))):
    try:
        r = json.load(open(t))
    except ValueError:  # still training
        continue
    a = r["test_window_accuracy"]
    print("teacher (pooled, float, %s): %.1f ± %.1f %% over %d folds" % (
        os.path.basename(os.path.dirname(t)), 100 * a["mean"], 100 * a["std"], len(r["folds"])))
for n in names:
    e = os.path.join(out, "runs", n, "fresh-ensemble.json")
    singles = [json.load(open(p))["accuracy"] for p in sorted(glob.glob(os.path.join(out, "runs", n, "fresh[0-4].json")))]
    if os.path.exists(e) and singles:
        print("%s, seed 1, fresh corpus: single fold models %.1f %% (mean; %s), ensemble of the %d %.1f %%" % (
            n, 100 * statistics.mean(singles), ", ".join("%.1f" % (100 * v) for v in singles), len(singles),
            100 * json.load(open(e))["accuracy"]))
