#!/usr/bin/python3
"""Writes a deterministic wide numeric matrix as CSV, for reading benchmarks (not a test fixture).

    /usr/bin/python3 make_wide_csv.py --samples 1000 --features 50000 \
        --layout rows=samples --out wide.csv [--gzip] [--seed 1] [--sheet samples.csv]

The values depend only on --seed, --samples and --features, never on the layout, so the
rows=samples and rows=features files hold the same matrix. The text looks like a real export:
six significant digits ("%.6g"), a mix of feature kinds (log-scale intensities, raw positive
abundances, signed scores, fractions in (0, 1), a few constant columns), missing cells written as
"NA" on even lines and as empty fields on odd lines, a two-group label. rows=samples files carry
the label as their last column (--label-column, "" for none); rows=features files can carry it as
a line (--label-line); --sheet writes a sample sheet (sample_id,batch,group) either way.
"""

import argparse
import gzip
import sys
import time

import numpy as np


def make_matrix(n, p, seed, missing_rate):
    """Returns (values n x p float64 with NaN gaps, group label per sample)."""
    rng = np.random.default_rng(seed)
    groups = np.where(rng.permutation(n) < n // 2, "group_a", "group_b")
    kind = rng.choice(5, size=p, p=[0.60, 0.25, 0.10, 0.048, 0.002])
    x = np.empty((n, p))
    # Column blocks keep the float64 temporaries small; the draws are sequential, so the result
    # depends on the seed only.
    block = 4096
    shift_b = groups == "group_b"
    for j0 in range(0, p, block):
        j1 = min(p, j0 + block)
        k = kind[j0:j1]
        m = j1 - j0
        z = rng.standard_normal((n, m))
        loc = np.select([k == 0, k == 1, k == 2], [rng.uniform(2, 12, m), rng.uniform(0, 8, m),
                                                   np.zeros(m)], 0.0)
        scale = np.select([k == 0, k == 1, k == 2], [rng.uniform(0.2, 2, m),
                                                     rng.uniform(0.3, 1.5, m),
                                                     rng.uniform(0.01, 5, m)], 1.0)
        # 1% of the features differ between the groups by one standard deviation.
        effect = (rng.random(m) < 0.01).astype(float)
        z = z + np.outer(shift_b, effect)
        v = loc + scale * z
        v[:, k == 1] = np.exp(v[:, k == 1])                      # positive abundances
        frac = k == 3
        v[:, frac] = 1 / (1 + np.exp(-(rng.uniform(-2, 2, frac.sum()) + z[:, frac])))
        const = k == 4
        v[:, const] = rng.uniform(0, 10, const.sum())           # one value per column
        x[:, j0:j1] = v
    gaps = rng.random((n, p)) < missing_rate
    # 2% of the features are mostly missing (30% of their cells).
    mostly = rng.random(p) < 0.02
    gaps |= (rng.random((n, p)) < 0.3) & mostly
    x[gaps] = np.nan
    return x, groups


def format_lines(ids, rows, tail=None):
    """Yields `id,v1,...,vp[,tail]` lines; NaN cells become NA on even lines, empty on odd ones.

    One %-format call per line keeps the per-value cost in C."""
    fmt = None
    for i, (name, row) in enumerate(zip(ids, rows)):
        if fmt is None or fmt[0] != len(row):
            fmt = (len(row), ",".join(["%.6g"] * len(row)))
        text = fmt[1] % tuple(row.tolist())
        if "nan" in text:
            token = "NA" if i % 2 == 0 else ""
            text = ",".join(token if f == "nan" else f for f in text.split(","))
        line = name + "," + text
        if tail is not None:
            line += "," + tail[i]
        yield line + "\n"


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawTextHelpFormatter)
    ap.add_argument("--samples", type=int, default=1000)
    ap.add_argument("--features", type=int, default=50000)
    ap.add_argument("--layout", choices=["rows=samples", "rows=features"], default="rows=samples")
    ap.add_argument("--out", required=True)
    ap.add_argument("--gzip", action="store_true", help="gzip-compress the data file (level 6)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--missing", type=float, default=0.015, help="share of cells missing at random")
    ap.add_argument("--label-column", default="group",
                    help="rows=samples: name of the label column ('' for none)")
    ap.add_argument("--label-line", action="store_true",
                    help="rows=features: write the labels as the line after the header")
    ap.add_argument("--sheet", help="also write a sample sheet (sample_id,batch,group)")
    a = ap.parse_args()

    t0 = time.perf_counter()
    n, p = a.samples, a.features
    x, groups = make_matrix(n, p, a.seed, a.missing)
    samples = [f"s{i + 1:05d}" for i in range(n)]
    features = [f"f{j + 1:07d}" for j in range(p)]

    opener = (lambda path: gzip.open(path, "wt", compresslevel=6, newline="")) if a.gzip else (
        lambda path: open(path, "w", newline=""))
    text_bytes = 0
    with opener(a.out) as f:
        def put(s):
            nonlocal text_bytes
            text_bytes += len(s)  # ASCII only: characters = bytes
            f.write(s)

        if a.layout == "rows=samples":
            label = a.label_column
            put(",".join(["sample"] + features + ([label] if label else [])) + "\n")
            for line in format_lines(samples, x, list(groups) if label else None):
                put(line)
        else:
            put(",".join(["feature"] + samples) + "\n")
            if a.label_line:
                put(",".join(["group"] + list(groups)) + "\n")
            xt = x.T
            for j0 in range(0, p, 1024):
                block = np.ascontiguousarray(xt[j0:j0 + 1024])
                for line in format_lines(features[j0:j0 + 1024], block):
                    put(line)
    if a.sheet:
        with open(a.sheet, "w", newline="") as f:
            f.write("sample_id,batch,group\n")
            for i, (s, g) in enumerate(zip(samples, groups)):
                f.write(f"{s},b{i % 4 + 1},{g}\n")
    missing = int(np.isnan(x).sum())
    print(f"wrote {a.out}: {n} samples x {p} features, {a.layout}, {text_bytes / 1e6:.1f} MB of "
          f"text, {missing} missing cells ({missing / (n * p):.2%}), "
          f"{time.perf_counter() - t0:.1f} s", file=sys.stderr)


if __name__ == "__main__":
    main()
