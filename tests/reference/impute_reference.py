#!/usr/bin/python3
"""Reference check for nearest-neighbour imputation (`pare reduce --impute knn`, `pare apply`).

Run as `/usr/bin/python3 impute_reference.py PATH_TO_PARE` (ctest does). Data: the breast cancer
data shipped by Debian's python3-sklearn 1.2.1 (569 x 30, breast_cancer.csv; CHECKS.md section 10),
values rounded to float32, with 6% of the cells of every feature punched out at random (seeded), and
the wine data (178 x 13, wine_data.csv) with 10% punched out and --log2.

Reference: scikit-learn's KNNImputer (uniform weights, the same k), which measures nearness by the
nan-Euclidean distance CHECKS.md section 11 defines, run in float64 on the float32 values pare
holds (log2(x + 1) of them for --log2, computed in float64 and rounded to float32 as pare does).
  reduce   every feature kept in input order (no ranking, filter or pruning), so reduced.csv holds
           every filled value: compared with KNNImputer().fit_transform on all samples;
  apply    the plan of a reduction on the first 400 samples applied to the other 169: compared with
           KNNImputer fitted on the 400 and transforming the 169.
pare's fill is the mean of the k donors in double rounded to float32, so values agree to float32
rounding: 1e-6 relative (the issue's tolerance). Prints one line per check; exits 1 on a failure.
"""

import csv
import os
import subprocess
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from reference_common import Checks  # noqa: E402

DATA_DIR = "/usr/lib/python3/dist-packages/sklearn/datasets/data"
REL = 1e-6


def load(name):
    with open(os.path.join(DATA_DIR, name)) as f:
        rows = list(csv.reader(f))[1:]
    x = np.array([[float(v) for v in r[:-1]] for r in rows], dtype=np.float64)
    return x.astype(np.float32), [r[-1] for r in rows]


def write_csv(path, x, labels):
    n, p = x.shape
    with open(path, "w") as f:
        f.write("sample," + ",".join(f"f{j + 1}" for j in range(p)) + ",class\n")
        for i in range(n):
            cells = ["NA" if np.isnan(v) else "%.9g" % v for v in x[i].tolist()]
            f.write(f"s{i + 1}," + ",".join(cells) + f",c{labels[i]}\n")


def read_reduced(path):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    return [r[0] for r in rows[1:]], np.array([[float(v) for v in r[1:]] for r in rows[1:]])


def run(pare, *args):
    r = subprocess.run([pare, *args, "--quiet"], capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError(f"pare {' '.join(args)} failed: {r.stderr}")


def compare(checks, name, got, want, punched):
    # Only the filled cells carry the imputation; the others must be the values themselves.
    rel = np.abs(got - want) / np.maximum(np.abs(want), 1e-30)
    worst = float(rel[punched].max()) if punched.any() else 0.0
    exact = bool((got[~punched].astype(np.float32) == want[~punched].astype(np.float32)).all())
    checks.check(f"{name}: {int(punched.sum())} filled cells within {REL:g} of KNNImputer", worst <= REL,
                 f"largest relative deviation {worst:.2e}")
    checks.check(f"{name}: observed cells unchanged", exact)


def main():
    pare = sys.argv[1]
    checks = Checks()
    try:
        from sklearn.impute import KNNImputer
    except ImportError:
        checks.skip("KNNImputer", "python3-sklearn is not installed")
        checks.summary()
        return checks.exit_code()
    if not os.path.exists(os.path.join(DATA_DIR, "breast_cancer.csv")):
        checks.skip("breast cancer data", "python3-sklearn's data files are missing")
        checks.summary()
        return checks.exit_code()
    rng = np.random.default_rng(17)
    with tempfile.TemporaryDirectory() as tmp:
        for name, fraction, log2, k in (("breast_cancer.csv", 0.06, False, 5), ("wine_data.csv", 0.10, True, 3)):
            x, labels = load(name)
            x = x.copy()
            x[rng.random(x.shape) < fraction] = np.nan
            data = os.path.join(tmp, name)
            write_csv(data, x, labels)
            held = np.log2(x.astype(np.float64) + 1).astype(np.float32) if log2 else x
            opts = ["--label", "class", "--impute", "knn", "--impute-neighbors", str(k), "--no-variance-filter",
                    "--no-prune", "--rank-by", "variance", "--keep", "0"] + (["--log2"] if log2 else [])
            # --rank-by variance orders the features; compare in input order through the names.
            out = os.path.join(tmp, name + "-all")
            run(pare, "reduce", data, *opts, "--out", out)
            ids, got = read_reduced(os.path.join(out, "reduced.csv"))
            with open(os.path.join(out, "reduced.csv")) as f:
                names = f.readline().strip().split(",")[1:]
            order = [int(n[1:]) - 1 for n in names]
            want = KNNImputer(n_neighbors=k).fit_transform(held.astype(np.float64))[:, order]
            compare(checks, f"{name} reduce (k={k}{', log2' if log2 else ''})", got, want, np.isnan(held[:, order]))

            n_fit = 400 if x.shape[0] > 400 else 120
            sample_list = os.path.join(tmp, name + "-train.txt")
            with open(sample_list, "w") as f:
                f.write("".join(f"s{i + 1}\n" for i in range(n_fit)))
            fit = os.path.join(tmp, name + "-fit")
            run(pare, "reduce", data, *opts, "--samples", sample_list, "--out", fit)
            new_data = os.path.join(tmp, name + "-new.csv")
            write_csv(new_data, x[n_fit:], labels[n_fit:])
            applied = os.path.join(tmp, name + "-applied")
            run(pare, "apply", os.path.join(fit, "plan.json"), new_data, "--out", applied)
            _, got = read_reduced(os.path.join(applied, "reduced.csv"))
            with open(os.path.join(applied, "reduced.csv")) as f:
                names = f.readline().strip().split(",")[1:]
            order = [int(n[1:]) - 1 for n in names]
            imputer = KNNImputer(n_neighbors=k).fit(held[:n_fit].astype(np.float64))
            want = imputer.transform(held[n_fit:].astype(np.float64))[:, order]
            compare(checks, f"{name} apply to {x.shape[0] - n_fit} new samples", got, want,
                    np.isnan(held[n_fit:][:, order]))
    checks.summary()
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
