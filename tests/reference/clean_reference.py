#!/usr/bin/python3
"""Reference checks for the normalisation before selection (`pare reduce --normalize sum|quantile`,
replayed by `pare apply`).

Run as `/usr/bin/python3 clean_reference.py PATH_TO_PARE` (ctest does). Data: the digits data shipped
by Debian's python3-sklearn 1.2.1 (digits.csv.gz, 1,797 images x 64 pixel counts 0-16: non-negative
counts with very many ties, the case quantile normalisation's tie rule is about; CHECKS.md section
10), each image a sample; pixels that are 0 in every image are left out (a constant feature).

References, independent numpy code (each named again beside its check):
  sum       each sample divided by its total and multiplied by 10^6 (by hand, in float64)
  quantile  Bolstad et al. 2003 as CHECKS.md section 11 states it: the reference is the mean over the
            samples of their sorted values; each value is replaced by the reference value of its
            rank, tied values by the mean of the reference values of their ranks
  apply     the plan of the first 1,200 images applied to the other 597: numpy maps each new image
            onto the reference learned from the 1,200 (the same rule), and sum scales each alone
Values agree to float32 rounding (pare holds float32): 1e-6 relative.
"""

import csv
import gzip
import os
import subprocess
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from reference_common import Checks  # noqa: E402

DATA = "/usr/lib/python3/dist-packages/sklearn/datasets/data/digits.csv.gz"
REL = 1e-6


def quantile_reference(x):
    return np.sort(x, axis=1).mean(axis=0)


def quantile_map(x, reference):
    out = np.empty_like(x)
    for i, row in enumerate(x):
        order = np.argsort(row, kind="stable")
        values = row[order]
        a = 0
        while a < len(values):
            b = a
            while b + 1 < len(values) and values[b + 1] == values[a]:
                b += 1
            out[i, order[a:b + 1]] = reference[a:b + 1].mean()
            a = b + 1
    return out


def write_csv(path, x, names):
    with open(path, "w") as f:
        f.write("sample," + ",".join(names) + "\n")
        for i, row in enumerate(x):
            f.write(f"img{i + 1}," + ",".join("%d" % v for v in row) + "\n")


def read_reduced(path, names):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    order = [names.index(n) for n in rows[0][1:]]
    return order, np.array([[float(v) for v in r[1:]] for r in rows[1:]])


def main():
    pare = sys.argv[1]
    checks = Checks()
    if not os.path.exists(DATA):
        checks.skip("digits data", "python3-sklearn's data files are missing")
        checks.summary()
        return checks.exit_code()
    with gzip.open(DATA, "rt") as f:
        x = np.array([[float(v) for v in line.split(",")[:-1]] for line in f if line.strip()])
    x = x[:, x.max(axis=0) > 0]
    names = [f"px{j + 1}" for j in range(x.shape[1])]
    opts = ["--no-missing-filter", "--no-variance-filter", "--no-prune", "--keep", "0", "--quiet"]
    with tempfile.TemporaryDirectory() as tmp:
        data = os.path.join(tmp, "digits.csv")
        write_csv(data, x, names)
        train = os.path.join(tmp, "train.txt")
        with open(train, "w") as f:
            f.write("".join(f"img{i + 1}\n" for i in range(1200)))
        new = os.path.join(tmp, "new.csv")
        write_csv(new, x[1200:], names)
        for how in ("sum", "quantile"):
            out = os.path.join(tmp, how)
            subprocess.run([pare, "reduce", data, "--normalize", how, *opts, "--out", out], check=True)
            order, got = read_reduced(os.path.join(out, "reduced.csv"), names)
            if how == "sum":
                want = x / x.sum(axis=1, keepdims=True) * 1e6  # by hand
            else:
                want = quantile_map(x, quantile_reference(x))  # Bolstad et al. 2003, CHECKS.md section 11
            dev = float((np.abs(got - want[:, order]) / np.maximum(np.abs(want[:, order]), 1e-30)).max())
            checks.check(f"{how}: {x.shape[0]} x {x.shape[1]} within {REL:g} of numpy", dev <= REL, f"largest {dev:.2e}")

            fit = os.path.join(tmp, how + "-fit")
            subprocess.run([pare, "reduce", data, "--normalize", how, "--samples", train, *opts, "--out", fit],
                           check=True)
            applied = os.path.join(tmp, how + "-applied")
            subprocess.run([pare, "apply", os.path.join(fit, "plan.json"), new, "--out", applied, "--quiet"],
                           check=True)
            order, got = read_reduced(os.path.join(applied, "reduced.csv"), names)
            if how == "sum":
                want = x[1200:] / x[1200:].sum(axis=1, keepdims=True) * 1e6
            else:
                want = quantile_map(x[1200:], quantile_reference(x[:1200]))
            dev = float((np.abs(got - want[:, order]) / np.maximum(np.abs(want[:, order]), 1e-30)).max())
            checks.check(f"{how}: apply to {x.shape[0] - 1200} new images within {REL:g} of numpy", dev <= REL,
                         f"largest {dev:.2e}")
    checks.summary()
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
