#!/usr/bin/python3
"""Reference checks for `pare reduce`: the kept features, in order, against an independent
re-implementation of SPEC section 4 steps 1-7 with general-purpose libraries, and the demo's
selection log.

Run as `/usr/bin/python3 reduce_reference.py PATH_TO_PARE` (ctest does).

Data: Debian python3-sklearn 1.2.1's breast_cancer.csv (/usr/lib/python3/dist-packages/sklearn/
datasets/data/; layout in /work/shared/CHECKS.md section 10: first line `569,30,malignant,benign`,
then 30 values and the class index), feature names from sklearn.datasets.load_breast_cancer(),
whose data must equal our parse. Seeded gaps are added (about 4% of cells everywhere, 25-30% in
three features, 15% in one), and the matrix is written as a rows=samples CSV with a label column.
Values are rounded to float32 first and written as the shortest decimal of that float32's float64
value, so pare parses exactly the float32 the reference receives as float64.

The reference re-implementation, step by step (each reference is named again beside its use):
  1 missing filter   numpy: NaN count / n > --drop-missing-above
  2 impute           numpy.nanmean (or numpy.nanmedian) of the observed cells, rounded to float32
                     (pare stores the matrix as float32)
  3 transform        numpy.log2(x + 1), rounded to float32, when --log2
  4 variance filter  numpy.nanvar(ddof=1) on the observed (transformed) cells < --min-variance
  5 relevance        binned MI: SPEC section 4 equal-frequency bins computed in numpy, then
                     sklearn.metrics.mutual_info_score(labels, bins); F: scipy.stats.f_oneway.
                     Scored on each feature's observed cells, as pare scores them (see below).
                     Ranked by score descending, ties in input order.
  6 redundancy       numpy.corrcoef on the imputed (transformed) float32 values; the sequential
                     walk in rank order drops a feature whose |r| with a kept one exceeds --max-corr
  7 top              stop once --keep features are kept

Scores use the observed cells only: pare learns the fill values at step 2 but fills the cells after
scoring (src/reduce.cpp); the correlations of step 6 use the filled cells. The script also reports
whether scoring the mean-filled cells would have changed the kept list (INFO line, not a check).

Then the demo: `pare demo --out TMP`; every redundancy row of its selection log names a feature
that is kept, with that feature's rank; the stated |r| agrees with numpy.corrcoef of the two
features' log2, mean-filled values; 200 features are kept.

Prints one line per check, then `N passed, M failed`; exits 1 on any failure. A missing dataset
file is a failure when CI=true, otherwise that part is skipped.
"""

import csv
import gzip
import json
import math
import os
import re
import subprocess
import sys
import tempfile
import time

import numpy as np

DATA_DIR = "/usr/lib/python3/dist-packages/sklearn/datasets/data"

# ---- tolerances ------------------------------------------------------------------------------
# A decision is only well defined when the data are not on its threshold: pare and the reference
# compute the same quantities in float64 on identical float32 inputs, differing in summation
# order (about 1e-15 relative). Every compared quantity must therefore sit farther than these
# margins from its threshold or its neighbour in the ranking; otherwise the check fails as
# ill-posed rather than passing by luck.
MARGIN_REL = 1e-9     # variance vs --min-variance, MI/F of neighbours in the rank order
MARGIN_R = 1e-6       # |r| vs --max-corr: pare's imputed cells are float32(mean), and the
                      # reference's mean may differ in its last float64 bit, which can move the
                      # float32 fill by one ulp (1e-7 relative) and r by far less than 1e-6
# The |r| in a selection-log reason is printed with 3 decimals: half a unit of the last digit,
# plus the float32 fill difference above.
R_TEXT = 0.0005 + 1e-6


from reference_common import Checks  # noqa: E402  (this folder is on sys.path)


def f32(a):
    """float64 copies of float32-rounded values (what pare stores)."""
    return np.asarray(a, dtype=np.float64).astype(np.float32).astype(np.float64)


def cell_text(v):
    # repr of the float64 holding a float32 value: the shortest decimal that reads back as that
    # float64, which is within half a float64 ulp of the float32, so it parses to the same float32.
    return "NA" if math.isnan(v) else repr(float(v))


# ---- data --------------------------------------------------------------------------------------

def load_breast_cancer(checks):
    import sklearn.datasets

    path = os.path.join(DATA_DIR, "breast_cancer.csv")
    if not os.path.exists(path):
        checks.skip("breast_cancer", f"{path} not found (install python3-sklearn)")
        return None
    # CHECKS.md section 10: first line `n,p,class names...`, then p values and the class index
    with open(path, newline="") as f:
        rows = [r for r in csv.reader(f) if r]
    n, p = int(rows[0][0]), int(rows[0][1])
    class_names = rows[0][2:]
    values = np.array([[float(t) for t in r[:p]] for r in rows[1:]])
    labels = [class_names[int(r[p])] for r in rows[1:]]
    bunch = sklearn.datasets.load_breast_cancer()
    # reference: sklearn.datasets.load_breast_cancer() of the same Debian package - the parse must
    # equal its data, or the names would sit on the wrong columns
    checks.check("breast_cancer: parse is 569 x 30 and equals sklearn.datasets.load_breast_cancer().data",
                 values.shape == (n, p) == (569, 30) and np.array_equal(values, bunch.data))
    return f32(values), [str(s) for s in bunch.feature_names], labels


def with_gaps(x, seed):
    """Seeded gaps: ~4% of all cells, plus 30%, 27% and 25% in features 2, 22, 27 and 15% in 6."""
    rng = np.random.default_rng(seed)
    x = x.copy()
    x[rng.random(x.shape) < 0.04] = np.nan
    n = x.shape[0]
    for j, rate in [(2, 0.30), (22, 0.27), (27, 0.25), (6, 0.15)]:
        x[rng.permutation(n)[: int(rate * n)], j] = np.nan
    return x


def write_csv(path, x, names, labels, label_name="diagnosis"):
    with open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["sample"] + names + [label_name])
        for i in range(x.shape[0]):
            w.writerow([f"s{i + 1:04d}"] + [cell_text(v) for v in x[i]] + [labels[i]])


# ---- the reference pipeline ----------------------------------------------------------------------

def spec_bins(v, bins):
    """SPEC section 4: value x of n gets floor(B * L(x) / n), L(x) = values strictly below x."""
    less = np.searchsorted(np.sort(v), v, side="left")  # L(x)
    return (bins * less) // len(v)  # exact integer floor


def score(x, y, criterion, bins=10):
    from scipy import stats
    from sklearn import metrics

    out = np.empty(x.shape[1])
    for j in range(x.shape[1]):
        ok = ~np.isnan(x[:, j])
        v, c = x[ok, j], y[ok]
        if criterion == "mi":
            # reference: sklearn.metrics.mutual_info_score (plug-in MI, nats) on the SPEC bins
            out[j] = metrics.mutual_info_score(c, spec_bins(v, bins))
        else:
            # reference: scipy.stats.f_oneway (one-way ANOVA F)
            out[j] = stats.f_oneway(*[v[c == k] for k in np.unique(c)]).statistic
    return out


def reference_reduce(x, labels, max_missing, min_variance, max_corr, keep, criterion="mi", log2=False,
                     impute="mean", score_filled=False):
    """Returns the kept feature indices in order, the decision per feature and the margins."""
    n, p = x.shape
    classes = sorted(set(labels))
    y = np.array([classes.index(v) for v in labels])
    decision = {}
    margins = {}
    # 1. missing filter (numpy)
    rate = np.isnan(x).sum(axis=0) / n
    alive = [j for j in range(p) if not rate[j] > max_missing]
    for j in range(p):
        if rate[j] > max_missing:
            decision[j] = ("missing", None)
    # 2. fill values (numpy.nanmean / numpy.nanmedian of the observed raw cells), float32
    fill = np.full(p, np.nan)
    for j in alive:
        fill[j] = f32(np.nanmean(x[:, j]) if impute == "mean" else np.nanmedian(x[:, j]))
    # 3. transform (numpy.log2(x + 1)), float32
    t = f32(np.log2(x + 1)) if log2 else x.copy()
    tfill = f32(np.log2(fill + 1)) if log2 else fill
    # 4. variance filter (numpy.nanvar, ddof = 1) on the observed transformed cells
    var = np.array([np.nanvar(t[:, j], ddof=1) for j in range(p)])
    margins["variance"] = min(abs(var[j] - min_variance) / min_variance for j in alive)
    survivors = []
    for j in alive:
        if var[j] < min_variance:
            decision[j] = ("variance", None)
        else:
            survivors.append(j)
    # filled, transformed matrix (float32 values)
    filled = t.copy()
    for j in range(p):
        filled[np.isnan(filled[:, j]), j] = tfill[j]
    # 5. relevance: score, rank descending, ties in input order
    s = score(filled[:, survivors] if score_filled else t[:, survivors], y, criterion)
    order = sorted(range(len(survivors)), key=lambda a: (-s[a], a))
    ranked = [survivors[a] for a in order]
    ranked_scores = [s[a] for a in order]
    gaps = [abs(ranked_scores[k] - ranked_scores[k + 1]) / max(abs(ranked_scores[k]), 1e-300)
            for k in range(len(ranked) - 1)]
    # 6-7. redundancy walk on numpy.corrcoef of the filled values, stopping after `keep` kept
    r = np.corrcoef(filled[:, ranked], rowvar=False)
    kept = []
    closest = math.inf
    examined = 0
    for a, j in enumerate(ranked):
        if keep and len(kept) >= keep:
            break
        examined = a + 1
        over = []
        for b in kept:
            closest = min(closest, abs(abs(r[b, a]) - max_corr))
            if abs(r[b, a]) > max_corr:
                over.append(b)
        if over:
            decision[j] = ("redundancy", {ranked[b]: r[b, a] for b in over})
        else:
            kept.append(a)
    for a in range(examined, len(ranked)):
        decision[ranked[a]] = ("top", None)
    kept_idx = [ranked[a] for a in kept]
    for k, j in enumerate(kept_idx):
        decision[j] = ("kept", k + 1)
    margins["r"] = closest
    margins["score"] = min(gaps[:examined]) if examined and gaps[:examined] else math.inf
    return kept_idx, decision, margins, {"var": var, "score": dict(zip(survivors, s)), "filled": filled}


# ---- running pare ----------------------------------------------------------------------------------

def run_reduce(checks, pare, tag, data, out, args):
    cmd = [pare, "reduce", data, "--out", out, "--quiet"] + args
    start = time.monotonic()
    res = subprocess.run(cmd, capture_output=True, text=True)
    seconds = time.monotonic() - start
    ok = checks.check(f"{tag}: `pare reduce {' '.join(args)}` exits 0", res.returncode == 0,
                      f"{seconds:.2f} s" if res.returncode == 0 else f"exit {res.returncode}: {res.stderr.strip()}")
    if not ok:
        return None
    with open(os.path.join(out, "selection-log.tsv"), newline="") as f:
        rows = list(csv.reader(f, delimiter="\t", quoting=csv.QUOTE_NONE))
    log = [dict(zip(rows[0], r)) for r in rows[1:]]
    with open(os.path.join(out, "ranking.tsv"), newline="") as f:
        rows = list(csv.reader(f, delimiter="\t", quoting=csv.QUOTE_NONE))
    ranking = [dict(zip(rows[0], r)) for r in rows[1:]]
    with open(os.path.join(out, "plan.json")) as f:
        plan = json.load(f)
    with open(os.path.join(out, "reduced.csv"), newline="") as f:
        header = next(csv.reader(f))
    return {"log": log, "ranking": ranking, "plan": plan, "reduced_header": header}


REDUNDANCY = re.compile(r"^\|r\| = ([0-9.]+) with (.+) \(kept, rank (\d+)\)$")


def compare(checks, tag, got, names, ref_kept, decision, margins, extra):
    checks.check(f"{tag}: inputs are clear of every threshold and of rank ties (well-posed)",
                 margins["variance"] > MARGIN_REL and margins["r"] > MARGIN_R and margins["score"] > MARGIN_REL,
                 f"variance {margins['variance']:.2g} rel, |r| {margins['r']:.2g}, score gap {margins['score']:.2g} rel")
    want = [names[j] for j in ref_kept]
    ranking = [row["feature"] for row in got["ranking"]]
    checks.check(f"{tag}: ranking.tsv = the reference's kept features in order", ranking == want,
                 f"{len(want)} kept: {', '.join(want)}" if ranking == want else f"pare {ranking}, reference {want}")
    checks.check(f"{tag}: plan.json kept.names = the same list", got["plan"]["kept"]["names"] == want)
    checks.check(f"{tag}: reduced.csv columns = sample, the same list (ids and numbers only)",
                 got["reduced_header"] == ["sample"] + want)
    # selection-log.tsv: every input feature, its step as the reference decided it
    log = got["log"]
    steps_ok = len(log) == len(names)
    bad = []
    for j, row in enumerate(log):
        step, info = decision[j]
        if row["feature"] != names[j] or row["index"] != str(j + 1) or row["step"] != step:
            bad.append(f"{names[j]}: pare {row['step']}, reference {step}")
            continue
        if step == "kept" and row["rank"] != str(info):
            bad.append(f"{names[j]}: rank {row['rank']}, reference {info}")
        if step == "redundancy":
            m = REDUNDANCY.match(row["reason"])
            partner = names.index(m.group(2)) if m and m.group(2) in names else None
            if partner is None or partner not in info:
                bad.append(f"{names[j]}: reason '{row['reason']}' names no kept feature above the threshold "
                           f"(reference: {[names[k] for k in info]})")
            elif abs(float(m.group(1)) - abs(info[partner])) > R_TEXT:
                bad.append(f"{names[j]}: |r| {m.group(1)}, numpy.corrcoef {abs(info[partner]):.6f}")
            elif decision[partner] != ("kept", int(m.group(3))):
                bad.append(f"{names[j]}: partner rank {m.group(3)}, reference {decision[partner]}")
    counts = {}
    for step, _ in decision.values():
        counts[step] = counts.get(step, 0) + 1
    checks.check(f"{tag}: selection-log.tsv has one row per input feature, each with the reference's step "
                 f"(and for redundancy a kept partner, its rank and |r| as numpy.corrcoef gives)",
                 steps_ok and not bad,
                 ", ".join(f"{k} {v}" for k, v in sorted(counts.items())) if not bad else "; ".join(bad[:5]))
    # the variance column (numpy.nanvar ddof=1) and the ranking score column
    worst = 0.0
    for j, row in enumerate(log):
        if row["variance"] != "NA":
            worst = max(worst, abs(float(row["variance"]) - extra["var"][j]) / extra["var"][j])
    checks.check(f"{tag}: selection-log variance = numpy.nanvar(ddof=1) of the observed (transformed) cells "
                 f"to 1e-9 relative", worst <= 1e-9, f"largest deviation {worst:.2g}")
    return ranking == want


def reduce_checks(checks, pare, tmp, dataset):
    x0, names, labels = dataset
    x = with_gaps(x0, 20240)
    data = os.path.join(tmp, "breast_cancer-gaps.csv")
    write_csv(data, x, names, labels)
    configs = [
        # the task's configuration: binned MI, mean fill, max-corr 0.9, keep 10
        ("mi-corr0.9-keep10", ["--drop-missing-above", "0.2", "--min-variance", "6e-5", "--max-corr", "0.9",
                               "--keep", "10"],
         dict(max_missing=0.2, min_variance=6e-5, max_corr=0.9, keep=10)),
        # log2 transform, median fill, F ranking, a tighter correlation limit
        ("f-log2-median-corr0.8-keep12", ["--drop-missing-above", "0.2", "--min-variance", "1e-4", "--max-corr", "0.8",
                                          "--keep", "12", "--log2", "--impute", "median", "--rank-by", "f"],
         dict(max_missing=0.2, min_variance=1e-4, max_corr=0.8, keep=12, log2=True, impute="median",
              criterion="f")),
        # no --keep: the whole walk
        ("mi-corr0.95-all", ["--drop-missing-above", "0.2", "--min-variance", "6e-5", "--max-corr", "0.95"],
         dict(max_missing=0.2, min_variance=6e-5, max_corr=0.95, keep=0)),
    ]
    for tag, args, params in configs:
        tag = "breast_cancer-gaps " + tag
        got = run_reduce(checks, pare, tag, data, os.path.join(tmp, "out-" + tag.replace(" ", "-")),
                         ["--label", "diagnosis"] + args)
        kept, decision, margins, extra = reference_reduce(x, labels, **params)
        if got is None:
            continue
        compare(checks, tag, got, names, kept, decision, margins, extra)
        alt, _, _, _ = reference_reduce(x, labels, score_filled=True, **params)
        print(f"INFO {tag}: scoring the filled cells instead would keep "
              + ("the same list" if alt == kept else f"{[names[j] for j in alt]}"))


# ---- the demo --------------------------------------------------------------------------------------

def demo_checks(checks, pare, tmp):
    out = os.path.join(tmp, "demo")
    start = time.monotonic()
    res = subprocess.run([pare, "demo", "--out", out, "--quiet"], capture_output=True, text=True)
    if not checks.check("demo: `pare demo --out TMP` exits 0", res.returncode == 0,
                        f"{time.monotonic() - start:.1f} s" if res.returncode == 0 else res.stderr.strip()):
        return
    folder = os.path.join(out, "reduce")
    with open(os.path.join(folder, "selection-log.tsv"), newline="") as f:
        rows = list(csv.reader(f, delimiter="\t", quoting=csv.QUOTE_NONE))
    log = [dict(zip(rows[0], r)) for r in rows[1:]]
    kept = {row["feature"]: int(row["rank"]) for row in log if row["status"] == "kept"}
    checks.check("demo: 200 features kept", len(kept) == 200, f"{len(kept)}")
    with open(os.path.join(folder, "plan.json")) as f:
        plan = json.load(f)
    checks.check("demo: plan.json kept.count is 200 and its names are the kept rows in rank order",
                 plan["kept"]["count"] == 200
                 and plan["kept"]["names"] == sorted(kept, key=lambda k: kept[k]))
    redundant = [row for row in log if row["step"] == "redundancy"]
    bad = []
    pairs = []
    for row in redundant:
        m = REDUNDANCY.match(row["reason"])
        if not m or m.group(2) not in kept or kept[m.group(2)] != int(m.group(3)):
            bad.append(f"{row['feature']}: {row['reason']}")
        else:
            pairs.append((row["feature"], m.group(2), float(m.group(1))))
    checks.check("demo: every redundancy row names a kept feature with its rank", redundant and not bad,
                 f"{len(redundant)} rows" if not bad else "; ".join(bad[:5]))
    # |r| of each pair recomputed with numpy.corrcoef on the features' log2(x + 1) values (the demo
    # runs --log2), gaps filled with the float32 mean of the observed raw values, as step 2 says.
    wanted = {a for a, _, _ in pairs} | {b for _, b, _ in pairs}
    values = {}
    with gzip.open(os.path.join(out, "greenhouse-expression.csv.gz"), "rt", newline="") as f:
        reader = csv.reader(f)
        next(reader)
        for row in reader:
            if row[0] in wanted:
                v = np.array([float(t) if t not in ("", "NA", "NaN", "nan", "null", "?") else np.nan
                              for t in row[1:]])
                v = f32(v)
                v[np.isnan(v)] = f32(np.nanmean(v))
                values[row[0]] = f32(np.log2(v + 1))
    worst = 0.0
    for a, b, stated in pairs:
        r = abs(np.corrcoef(values[a], values[b])[0, 1])
        worst = max(worst, abs(r - stated))
    checks.check("demo: each stated |r| = numpy.corrcoef of the pair (3 decimals)",
                 pairs and worst <= R_TEXT, f"largest difference {worst:.6f} over {len(pairs)} pairs")


def main():
    if len(sys.argv) != 2:
        print("usage: reduce_reference.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    started = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="pare-reduce-ref-") as tmp:
        dataset = load_breast_cancer(checks)
        if dataset is not None:
            reduce_checks(checks, pare, tmp, dataset)
        demo_checks(checks, pare, tmp)
    checks.summary(f" ({time.monotonic() - started:.1f} s)")
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
