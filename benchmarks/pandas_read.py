#!/usr/bin/python3
"""Baseline for bench_read.sh: times pandas.read_csv (Debian python3-pandas) on a matrix file and,
given pare's profile.tsv of the same file, checks pare's statistics against numpy on the values
pandas read.

    /usr/bin/python3 pandas_read.py FILE --layout rows=samples|rows=features \
        [--label-column NAME] [--profile profile.tsv] [--tol 1e-5]

Prints `key value` lines (pandas_read_seconds, pandas_peak_rss_kb, ...), then one line per check;
exits 1 when a check fails.
"""

import argparse
import csv
import math
import resource
import sys
import time
import warnings

import numpy as np
import pandas as pd


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("file")
    ap.add_argument("--layout", choices=["rows=samples", "rows=features"], required=True)
    ap.add_argument("--label-column", default="", help="rows=samples: the label column to drop")
    ap.add_argument("--profile", help="pare's profile.tsv of the same file")
    ap.add_argument("--tol", type=float, default=1e-5)
    a = ap.parse_args()

    # The default C parser and float converter, as a user would call it; index = first column.
    # pandas' default converter (xstrtod) may differ from correct rounding in the last bit of a
    # double, which is far below any tolerance used here.
    t0 = time.perf_counter()
    df = pd.read_csv(a.file, index_col=0)
    seconds = time.perf_counter() - t0
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # kilobytes on Linux
    print(f"pandas_version {pd.__version__}")
    print(f"pandas_read_seconds {seconds:.3f}")
    print(f"pandas_peak_rss_kb {peak_kb}")
    print(f"pandas_shape {df.shape[0]}x{df.shape[1]}")
    sys.stdout.flush()
    if not a.profile:
        return 0

    if a.layout == "rows=samples":
        if a.label_column:
            df = df.drop(columns=[a.label_column])
        names = [str(c) for c in df.columns]
        x = df.to_numpy(dtype=np.float64)            # samples x features
    else:
        names = [str(i) for i in df.index]
        x = df.to_numpy(dtype=np.float64).T          # samples x features
    del df

    with open(a.profile, newline="") as f:
        rows = list(csv.reader(f, delimiter="\t"))
    col = {k: i for i, k in enumerate(rows[0])}
    body = rows[1:]

    def column(key):
        return np.array([math.nan if r[col[key]] == "NA" else float(r[col[key]]) for r in body])

    failed = 0

    def check(name, ok, detail):
        nonlocal failed
        failed += not ok
        print(f"{'PASS' if ok else 'FAIL'} {name} ({detail})")

    check("feature names and order", [r[col["feature"]] for r in body] == names,
          f"{len(body)} profile lines, {len(names)} columns read by pandas")
    if len(body) != len(names):
        return 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        # reference: numpy.count_nonzero / numpy.nanvar(ddof=1) / numpy.nanmean,
        # Debian python3-numpy 1.24.2, on the values pandas.read_csv parsed.
        n_ref = np.count_nonzero(~np.isnan(x), axis=0)
        var_ref = np.nanvar(x, axis=0, ddof=1)
        mean_ref = np.nanmean(x, axis=0)
        abs_mean = np.maximum(np.nanmean(np.abs(x), axis=0), 1e-300)
        # The same on float32-rounded values (pare stores float32, accumulates in double).
        x32 = x.astype(np.float32).astype(np.float64)
        var32_ref = np.nanvar(x32, axis=0, ddof=1)
    check("n equals numpy's count of observed values",
          np.array_equal(column("n").astype(np.int64), n_ref), f"{len(names)} features")

    def rel(actual, expected):
        both_nan = np.isnan(actual) & np.isnan(expected)
        same = (actual == expected) | both_nan
        err = np.abs(actual - expected) / np.maximum(np.abs(expected), 1e-300)
        return np.where(same, 0.0, np.nan_to_num(err, nan=np.inf))

    # Tolerance 1e-5 (the brief's): float32 storage rounds each value by <= 2^-24 ~ 6e-8
    # relative, which moves the variance by ~2 * 6e-8 * |x|/sd at worst; the generator's
    # non-constant features have sd/|mean| well above 0.01.
    # The mean is compared relative to mean(|x|), not to |mean|: rounding each value by <= 6e-8
    # relative moves the mean by <= 6e-8 * mean(|x|), which can be large next to a mean near 0.
    # A constant column has variance 0; numpy on float64 leaves ~(n * 2^-53 * |x|)^2 from the
    # rounded mean, pare (whose float32 sums are exact in double) exactly 0. Absolute floor for
    # the variance: (1e-10 * mean|x|)^2.
    var_floor = (1e-10 * abs_mean) ** 2
    for key, got, ref, tol, scale in (
            ("variance", column("variance"), var_ref, a.tol, None),
            ("mean (relative to mean |x|)", column("mean"), mean_ref, a.tol, abs_mean),
            ("variance vs float32-rounded values", column("variance"), var32_ref, 1e-9, None)):
        err = rel(got, ref) if scale is None else np.abs(got - ref) / scale
        err = np.where(np.isnan(got) & np.isnan(ref), 0.0, np.nan_to_num(err, nan=np.inf))
        if scale is None:
            err = np.where(np.abs(got - ref) <= var_floor, 0.0, err)
        worst = int(np.argmax(err))
        check(f"{key} vs numpy", bool(np.all(err <= tol)),
              f"{len(names)} features, max rel err {err[worst]:.1e} at {names[worst]}, tol {tol:g}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
