#!/usr/bin/python3
"""Reference checks for a continuous target (`pare rank` / `pare reduce` with --target / --targets).

Run as `/usr/bin/python3 target_reference.py PATH_TO_PARE` (ctest does). The data are open datasets
shipped by Debian's python3-sklearn 1.2.1 (/usr/lib/python3/dist-packages/sklearn/datasets/data/,
layouts in /work/shared/CHECKS.md section 10):
  diabetes       442 x 10 (diabetes_data_raw.csv.gz), target: disease progression one year later
                 (diabetes_target.csv.gz); integer and 1-4 decimal values, so many ties
  breast_cancer  569 x 30 (breast_cancer.csv); the target is the measurement with the most distinct
                 values, the other 29 the features
  diabetes, jittered: every value plus a seeded normal jitter of 1e-3 sd, so no column has ties and
                 the MI is compared with scikit-learn's own estimator
Values are rounded to float32 and written as the shortest decimal of that float32's float64 value,
so pare parses exactly the float32 the references receive as float64 (as rank_reference.py does).

References (each named again beside its check):
  pearson_r, pearson_p      scipy.stats.pearsonr
  spearman_rho, spearman_p  scipy.stats.spearmanr
  *_q                       an own Benjamini-Hochberg step-up (checked in rank_reference.py against
                            CHECKS.md section 3)
  mi                        scikit-learn's own estimator, sklearn.feature_selection._mutual_info.
                            _compute_mi_cc, on tie-free columns scaled by their sd (n denominator) as
                            mutual_info_regression scales them, without its added noise (CHECKS.md
                            section 11); on columns with ties an own direct O(n^2) implementation of
                            the documented tie rule (notebooks-free-docs/numerics.md)
  reduce                    the kept features and their order from numpy: Spearman q <= fdr, |rho|
                            descending (ties in input order), greedy |Pearson r| <= max_corr pruning
                            on the mean-filled values, the first K
Runs with gaps compare against the references on each feature's observed pairs.
Prints one line per check and `N passed, M failed, K skipped`; exits 1 on any failure.
"""

import csv
import gzip
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from reference_common import Checks  # noqa: E402

DATA_DIR = "/usr/lib/python3/dist-packages/sklearn/datasets/data"
# Correlations and p-values: the same formulas in float64 on identical inputs; only summation
# order differs.
REL = 1e-10
# p-values below this underflow differently in Boost.Math and scipy (see rank_reference.py).
P_FLOOR = 1e-290
# MI: the same counts give the same digammas; 1e-9 relative (CHECKS.md section 11's tolerance),
# with an absolute floor for estimates clipped at 0.
REL_MI = 1e-9
ABS_MI = 1e-12


def f32(a):
    return np.asarray(a, dtype=np.float64).astype(np.float32).astype(np.float64)


def cell(v):
    return "NA" if math.isnan(v) else repr(float(v))


def close(a, b, rel, floor=0.0):
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    if abs(a) < floor and abs(b) < floor:
        return True
    return abs(a - b) <= rel * max(abs(a), abs(b))


def bh(p):
    p = np.asarray(p, dtype=np.float64)
    m = len(p)
    order = np.argsort(p, kind="stable")
    q = np.empty(m)
    running = 1.0
    for rank in range(m, 0, -1):
        i = order[rank - 1]
        running = min(running, p[i] * m / rank)
        q[i] = running
    return q


def direct_mi(x, y, k):
    """The documented estimator, point by point (notebooks-free-docs/numerics.md): distances
    |x_j - x_i| / sd_x and |y_j - y_i| / sd_y (sd with n denominator), max-norm; eps_i the k-th
    smallest distance to another point. eps_i > 0: k_i, n_x + 1, n_y + 1 count the points strictly
    closer than eps_i in both variables, in x, in y; eps_i = 0: those equal to point i in both, in
    x, in y (Gao et al. 2017); point i included each time. Without ties k_i = k: estimator 1."""
    from scipy.special import digamma
    n = len(x)
    sx, sy = np.std(x), np.std(y)
    total = 0.0
    for i in range(n):
        dx = np.abs(x - x[i]) / sx
        dy = np.abs(y - y[i]) / sy
        d = np.maximum(dx, dy)
        eps = np.partition(np.delete(d, i), k - 1)[k - 1]
        if eps > 0:
            kk, nx1, ny1 = (np.count_nonzero(v < eps) for v in (d, dx, dy))
        else:
            kk, nx1, ny1 = (np.count_nonzero(v == 0) for v in (d, dx, dy))
        total += digamma(kk) - digamma(nx1) - digamma(ny1)
    return max(0.0, digamma(n) + total / n)


def sklearn_mi(x, y, k):
    # reference: scikit-learn's own KSG implementation, on the sd-scaled columns (no noise added)
    from sklearn.feature_selection._mutual_info import _compute_mi_cc
    return _compute_mi_cc(x / np.std(x), y / np.std(y), k)


def run(checks, pare, tag, args, expect_ok=True):
    res = subprocess.run([pare] + args, capture_output=True, text=True)
    if expect_ok:
        checks.check(f"{tag}: exits 0", res.returncode == 0, res.stderr.strip()[:300])
    return res


def read_tsv(path):
    with open(path, newline="") as f:
        rows = list(csv.reader(f, delimiter="\t"))
    return rows[0], rows[1:]


def num(t):
    return math.nan if t == "NA" else float(t)


def check_ranking(checks, tag, path, x, names, y, k=3):
    """Every column of ranking.tsv against the references, on each feature's observed pairs."""
    from scipy import stats
    header, body = read_tsv(path)
    want = ["rank", "feature", "pearson_r", "pearson_p", "pearson_q", "spearman_rho", "spearman_p",
            "spearman_q", "mi", "variance", "missing_rate", "index", "flags"]
    checks.check(f"{tag}: ranking.tsv header", header == want, " ".join(header))
    col = {h: i for i, h in enumerate(header)}
    got = {r[col["feature"]]: r for r in body}
    checks.check(f"{tag}: one line per feature", len(got) == len(names) == len(body), f"{len(body)} lines")
    p_ref = {"pearson": [], "spearman": []}
    worst = {"pearson": 0.0, "spearman": 0.0, "mi": 0.0}
    bad = []
    tie_free = 0
    for j, name in enumerate(names):
        ok = ~np.isnan(x[:, j])
        xj, yj = x[ok, j], y[ok]
        # reference: scipy.stats.pearsonr / spearmanr (two-sided)
        r, rp = stats.pearsonr(xj, yj)
        rho, sp = stats.spearmanr(xj, yj)
        p_ref["pearson"].append(rp)
        p_ref["spearman"].append(sp)
        row = got.get(name)
        if row is None:
            bad.append(f"{name} missing")
            continue
        for key, ref in (("pearson_r", r), ("pearson_p", rp), ("spearman_rho", rho), ("spearman_p", sp)):
            v = num(row[col[key]])
            floor = P_FLOOR if key.endswith("_p") else 0.0
            if not close(v, ref, REL, floor):
                bad.append(f"{name} {key} {v!r} vs {ref!r}")
            elif ref != 0:
                worst[key.split("_")[0]] = max(worst[key.split("_")[0]], abs(v - ref) / abs(ref))
        # reference: sklearn _compute_mi_cc on tie-free columns, else the direct tie rule
        if len(np.unique(xj)) == len(xj) and len(np.unique(yj)) == len(yj):
            ref_mi = sklearn_mi(xj, yj, k)
            tie_free += 1
        else:
            ref_mi = direct_mi(xj, yj, k)
        v = num(row[col["mi"]])
        if not (abs(v - ref_mi) <= REL_MI * max(abs(v), abs(ref_mi)) or (abs(v) < ABS_MI and abs(ref_mi) < ABS_MI)):
            bad.append(f"{name} mi {v!r} vs {ref_mi!r}")
        elif ref_mi:
            worst["mi"] = max(worst["mi"], abs(v - ref_mi) / abs(ref_mi))
        if not close(num(row[col["missing_rate"]]), 1 - ok.mean(), 1e-12):
            bad.append(f"{name} missing_rate")
    for kind in ("pearson", "spearman"):
        q = bh(p_ref[kind])
        for j, name in enumerate(names):
            v = num(got[name][col[f"{kind}_q"]]) if name in got else math.nan
            if not close(v, q[j], 1e-9, P_FLOOR):
                bad.append(f"{name} {kind}_q {v!r} vs {q[j]!r}")
    checks.check(f"{tag}: r, p, rho, p vs scipy.stats.pearsonr/spearmanr to {REL:g}; q vs BH; mi vs "
                 f"sklearn _compute_mi_cc ({tie_free} tie-free columns) or the direct tie rule to {REL_MI:g}",
                 not bad, "; ".join(bad[:6]) if bad else
                 f"largest deviations: r/p {worst['pearson']:.1e}, rho/p {worst['spearman']:.1e}, mi {worst['mi']:.1e}")
    # ranked by |spearman rho| descending
    rho_col = [abs(num(r[col["spearman_rho"]])) for r in body]
    checks.check(f"{tag}: ranked by |spearman_rho|, best first", all(a >= b for a, b in zip(rho_col, rho_col[1:])))


def load_diabetes(checks):
    data = os.path.join(DATA_DIR, "diabetes_data_raw.csv.gz")
    target = os.path.join(DATA_DIR, "diabetes_target.csv.gz")
    if not (os.path.exists(data) and os.path.exists(target)):
        checks.skip("diabetes", "diabetes files not found (install python3-sklearn)")
        return None
    with gzip.open(data, "rt") as f:
        x = np.array([[float(t) for t in line.split()] for line in f if line.strip()])
    with gzip.open(target, "rt") as f:
        y = np.array([float(line) for line in f if line.strip()])
    # CHECKS.md section 10: 442 x 10 / 442 x 1
    checks.check("diabetes: parse is 442 x 10 and 442 targets", x.shape == (442, 10) and y.shape == (442,))
    names = ["age", "sex", "bmi", "bp", "tc", "ldl", "hdl", "tch", "ltg", "glu"]
    return f32(x), names, f32(y)


def load_breast_cancer(checks):
    path = os.path.join(DATA_DIR, "breast_cancer.csv")
    if not os.path.exists(path):
        checks.skip("breast_cancer", f"{path} not found (install python3-sklearn)")
        return None
    import sklearn.datasets
    with open(path, newline="") as f:
        rows = [r for r in csv.reader(f) if r]
    n, p = int(rows[0][0]), int(rows[0][1])
    x = np.array([[float(t) for t in r[:p]] for r in rows[1:]])
    names = [str(s).replace(" ", "_") for s in sklearn.datasets.load_breast_cancer().feature_names]
    x = f32(x)
    # the target: the column with the most distinct values (the values have 4-5 significant digits,
    # so every column has some ties)
    t = max(range(p), key=lambda j: len(np.unique(x[:, j])))
    keep = [j for j in range(p) if j != t]
    return x[:, keep], [names[j] for j in keep], x[:, t], names[t]


def write_rows_are_samples(path, x, names, y, target_name, ids):
    with open(path, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["sample"] + names + [target_name])
        for i in range(x.shape[0]):
            w.writerow([ids[i]] + [cell(v) for v in x[i]] + [cell(y[i])])


def reference_selection(x, y, fdr, max_corr, keep):
    """reduce's kept features from numpy: q filter, |rho| order, greedy pruning, first K."""
    from scipy import stats
    p = x.shape[1]
    rho = np.array([stats.spearmanr(x[:, j], y)[0] for j in range(p)])
    q = bh([stats.spearmanr(x[:, j], y)[1] for j in range(p)])
    order = sorted([j for j in range(p) if q[j] <= fdr], key=lambda j: -abs(rho[j]))  # stable
    filled = np.where(np.isnan(x), np.nanmean(x, axis=0), x)
    kept = []
    for j in order:
        if all(abs(np.corrcoef(filled[:, j], filled[:, m])[0, 1]) <= max_corr for m in kept):
            kept.append(j)
        if len(kept) == keep:
            break
    return kept


def main():
    pare = sys.argv[1]
    checks = Checks()
    tmp = tempfile.mkdtemp(prefix="pare-target-")

    diabetes = load_diabetes(checks)
    if diabetes is not None:
        x, names, y = diabetes
        ids = [f"p{i + 1:03d}" for i in range(x.shape[0])]
        path = os.path.join(tmp, "diabetes.csv")
        write_rows_are_samples(path, x, names, y, "progression", ids)
        out = os.path.join(tmp, "rank-diabetes")
        if run(checks, pare, "diabetes rank --target", ["rank", path, "--target", "progression", "--out", out,
                                                        "--quiet"]).returncode == 0:
            check_ranking(checks, "diabetes", os.path.join(out, "ranking.tsv"), x, names, y)
        # threads: the same bytes with 1 and 2 threads
        out1 = os.path.join(tmp, "rank-diabetes-1")
        run(checks, pare, "diabetes rank --threads 1", ["rank", path, "--target", "progression", "--out", out1,
                                                         "--quiet", "--threads", "1"])
        same = open(os.path.join(out, "ranking.tsv"), "rb").read() == open(os.path.join(out1, "ranking.tsv"), "rb").read()
        checks.check("diabetes: ranking.tsv identical with --threads 1 and the default", same)

        # gaps punched at random (seeded): each feature scored on its observed pairs
        rng = np.random.default_rng(7)
        xg = x.copy()
        xg[rng.random(xg.shape) < 0.08] = np.nan
        path_g = os.path.join(tmp, "diabetes-gaps.csv")
        write_rows_are_samples(path_g, xg, names, y, "progression", ids)
        out = os.path.join(tmp, "rank-gaps")
        if run(checks, pare, "diabetes with gaps rank", ["rank", path_g, "--target", "progression", "--out", out,
                                                          "--quiet"]).returncode == 0:
            check_ranking(checks, "diabetes with gaps", os.path.join(out, "ranking.tsv"), xg, names, y)

        # reduce: the kept features and their order
        out = os.path.join(tmp, "reduce-diabetes")
        res = run(checks, pare, "diabetes reduce --target --fdr 0.05 --keep 5",
                  ["reduce", path, "--target", "progression", "--fdr", "0.05", "--keep", "5", "--out", out, "--quiet"])
        if res.returncode == 0:
            want = [names[j] for j in reference_selection(x, y, 0.05, 0.9, 5)]
            _, body = read_tsv(os.path.join(out, "ranking.tsv"))
            got = [r[1] for r in body]
            checks.check("diabetes reduce: kept features and order equal numpy's (Spearman q <= 0.05, |rho| "
                         "order, |r| <= 0.9 pruning, first 5)", got == want, f"pare {got}, numpy {want}")
            header, body = read_tsv(os.path.join(out, "samples.tsv"))
            checks.check("diabetes reduce: samples.tsv carries the target", header[1] == "progression" and
                         all(float(r[1]) == y[i] for i, r in enumerate(body)), " ".join(header[:3]))
            plan = json.load(open(os.path.join(out, "plan.json")))
            checks.check("diabetes reduce: plan.json records the target and rank_by spearman",
                         plan["read"]["target"] is True and plan["read"]["label"] == "progression" and
                         plan["parameters"]["rank_by"] == "spearman")

        # a target that is not a number: one clear error naming the sample, exit 3, nothing written
        bad = os.path.join(tmp, "diabetes-bad.csv")
        with open(path) as f, open(bad, "w") as g:
            lines = f.read().splitlines()
            lines[5] = lines[5].rsplit(",", 1)[0] + ",high"
            g.write("\n".join(lines) + "\n")
        out = os.path.join(tmp, "bad")
        res = run(checks, pare, "bad target", ["reduce", bad, "--target", "progression", "--out", out, "--quiet"],
                  False)
        checks.check("a target value 'high' is exit 3 with one line naming the sample, no output folder",
                     res.returncode == 3 and "p005" in res.stderr and "high" in res.stderr and
                     res.stderr.count("\n") == 1 and not os.path.exists(out), res.stderr.strip())

        # tie-free: the MI against scikit-learn's own estimator on every column
        # (the first seed from 11 on whose jittered float32 values have no tie at all)
        for seed in range(11, 40):
            rng = np.random.default_rng(seed)
            xj = f32(x + rng.normal(0, 1e-2, x.shape) * np.std(x, axis=0))
            yj = f32(y + rng.normal(0, 1e-2, y.shape) * np.std(y))
            tie_free = all(len(np.unique(xj[:, j])) == len(yj) for j in range(xj.shape[1])) and \
                len(np.unique(yj)) == len(yj)
            if tie_free:
                break
        checks.check("diabetes, jittered: every column and the target free of ties", tie_free, f"seed {seed}")
        path_j = os.path.join(tmp, "diabetes-jittered.csv")
        write_rows_are_samples(path_j, xj, names, yj, "progression", ids)
        for k in (3, 5):
            out = os.path.join(tmp, f"rank-jittered-{k}")
            if run(checks, pare, f"diabetes, jittered rank --neighbors {k}",
                   ["rank", path_j, "--target", "progression", "--neighbors", str(k), "--out", out,
                    "--quiet"]).returncode == 0:
                check_ranking(checks, f"diabetes, jittered, k = {k}", os.path.join(out, "ranking.tsv"), xj, names,
                              yj, k)
        # chi2 against a target is a usage error before reading
        res = run(checks, pare, "chi2 target", ["rank", path, "--target", "progression", "--rank-by", "chi2",
                                                "--out", out], False)
        checks.check("--rank-by chi2 with --target is a usage error (exit 2)", res.returncode == 2,
                     res.stderr.strip())

    cancer = load_breast_cancer(checks)
    if cancer is not None:
        x, names, y, target_name = cancer
        ids = [f"c{i + 1:03d}" for i in range(x.shape[0])]
        # rows=features with the target in a sample sheet (reversed order, two values missing)
        path = os.path.join(tmp, "cancer.csv")
        with open(path, "w", newline="") as f:
            w = csv.writer(f, lineterminator="\n")
            w.writerow(["feature"] + ids)
            for j, name in enumerate(names):
                w.writerow([name] + [cell(v) for v in x[:, j]])
        sheet = os.path.join(tmp, "sheet.csv")
        missing = {3, 100}
        with open(sheet, "w", newline="") as f:
            w = csv.writer(f, lineterminator="\n")
            w.writerow(["sample", "batch", target_name])
            for i in reversed(range(x.shape[0])):
                w.writerow([ids[i], "b1", "NA" if i in missing else cell(y[i])])
        out = os.path.join(tmp, "rank-cancer")
        res = run(checks, pare, "breast_cancer rank --targets SHEET:COLUMN, rows=features",
                  ["rank", path, "--layout", "rows=features", "--targets", f"{sheet}:{target_name}", "--out", out])
        if res.returncode == 0:
            used = np.array([i not in missing for i in range(x.shape[0])])
            check_ranking(checks, f"breast_cancer ({target_name} as target)", os.path.join(out, "ranking.tsv"),
                          x[used], names, y[used])
            checks.check("breast_cancer: the summary counts the 2 samples without a target value",
                         "2 without a target value left out" in res.stdout, res.stdout.splitlines()[1:3])

    checks.summary()
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
