#!/usr/bin/python3
"""Writes a deterministic wide numeric matrix as CSV, for benchmarks (not a test fixture).

    /usr/bin/python3 make_wide_csv.py --samples 1000 --features 50000 \
        --layout rows=samples --out wide.csv [--gzip] [--seed 1] [--sheet samples.csv] \
        [--scenario plain|planted] [--truth truth.tsv]

The values depend only on --seed, --samples, --features and the scenario options, never on the
layout, so the rows=samples and rows=features files hold the same matrix. The text looks like a
real export: six significant digits ("%.6g"), missing cells written as "NA" on even lines and as
empty fields on odd lines, a two-group label (group_a / group_b). rows=samples files carry the
label as their last column (--label-column, "" for none); rows=features files can carry it as a
line (--label-line); --sheet writes a sample sheet (sample_id,batch,group) either way.

Scenarios:

plain (default; what bench_read.sh reads): a mix of feature kinds (log-scale intensities, raw
  positive abundances, signed scores, fractions in (0, 1), a few constant columns), 1% of the
  features shifted by one standard deviation between the groups, --missing cells missing at
  random and 2% of the features 30% missing. Built whole in memory (n x p float64) before it is
  written.

planted (for bench_reduce.py: every step of `pare reduce` has something to do):
  - kinds: 55% log-scale intensities, 20% positive abundances exp(normal), 10% signed scores,
    5% fractions, 8% small counts (Poisson, so many tied values), 2% near-constant columns
    (a third exactly constant, a third with variance about 1e-10, a third with variance about
    1e-6 and only a handful of distinct values);
  - class signal: 1% of the free features are shifted between the groups by 0.4 to 1.2 standard
    deviations (counts: rate multiplied by e^0.4 to e^1.2), either sign;
  - gaps: --missing of the cells at random, plus 3% of the features missing 5-15% of their
    cells and 2% missing 30-60% (above the usual 0.2 limit);
  - correlated blocks: --block-share of the features (default 10%) sit in blocks of 2 to 8
    scattered columns that are noisy copies of a block latent (z = sign * (sqrt(rho) * latent +
    sqrt(1 - rho) * noise), a quarter of the members sign-flipped), so two members correlate at
    +-rho: half of the blocks have rho in [0.96, 0.995] (above a 0.9 pruning threshold even
    after a few mean-filled gaps), half in [0.5, 0.8] (below it); 10% of the blocks carry class
    signal through their latent. Block members are intensities or scores (linear in z), so rho is
    the Pearson correlation.
  It is generated in tiles of 64 samples x 8,192 features, each tile from its own generator keyed
  by (seed, tile row, tile column), and written as it is generated: memory is one band of tiles
  (64 x p for rows=samples, n x 8,192 for rows=features), never the matrix or the text, so any
  size can be written. --truth writes the design per feature (kind, designed missing rate,
  effect, block, rho, sign).
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


# ---- the planted scenario ------------------------------------------------------------------

TILE_ROWS = 64       # samples per tile; part of the definition of the values (do not change)
TILE_COLS = 8192     # features per tile; likewise

INTENSITY, ABUNDANCE, SCORE, FRACTION, COUNT, NEAR_CONSTANT = range(6)
KIND_NAMES = ["intensity", "abundance", "score", "fraction", "count", "near_constant"]


class PlantedDesign:
    """Everything about the planted matrix that is per feature or per sample (O(n + p) memory);
    the cells are drawn tile by tile from it (see tile())."""

    def __init__(self, n, p, seed, missing_rate, block_share):
        self.n, self.p, self.seed = n, p, seed
        rng = np.random.default_rng([seed, 0])
        self.group_b = rng.permutation(n) >= n - n // 2      # half (rounded down) in group_a
        self.kind = rng.choice(6, size=p, p=[0.55, 0.20, 0.10, 0.05, 0.08, 0.02])
        u = rng.random(p)
        self.loc = np.select([self.kind == INTENSITY, self.kind == ABUNDANCE, self.kind == FRACTION,
                              self.kind == COUNT, self.kind == NEAR_CONSTANT],
                             [2 + 10 * u, 8 * u, -2 + 4 * u, 0.5 + 14.5 * u, 1 + 8.9 * u], 0.0)
        u = rng.random(p)
        self.scale = np.select([self.kind == INTENSITY, self.kind == ABUNDANCE, self.kind == SCORE],
                               [0.2 + 1.8 * u, 0.3 + 1.2 * u, 0.05 + 4.95 * u], 1.0)
        # near-constant columns: 0 exactly constant, 1 variance ~1e-10, 2 variance ~1e-6
        self.near_type = rng.integers(0, 3, p)
        self.missing = np.full(p, missing_rate)
        u, v = rng.random(p), rng.random(p)
        self.missing[u < 0.03] = 0.05 + 0.10 * v[u < 0.03]
        self.missing[u > 0.98] = 0.30 + 0.30 * v[u > 0.98]

        # correlated blocks, scattered over the columns
        self.block = np.full(p, -1)
        self.rho_of_block = np.zeros(0)
        self.sign = np.where(rng.random(p) < 0.25, -1.0, 1.0)
        order = rng.permutation(p)
        target = int(round(block_share * p))
        sizes = []
        while sum(sizes) < target:
            sizes.append(int(rng.integers(2, 9)))
        if sizes and sum(sizes) > target:
            sizes[-1] -= sum(sizes) - target
            if sizes[-1] < 2:
                sizes.pop()
        nb = len(sizes)
        starts = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        for b in range(nb):
            self.block[order[starts[b]:starts[b + 1]]] = b
        high = rng.random(nb) < 0.5
        self.rho_of_block = np.where(high, rng.uniform(0.96, 0.995, nb), rng.uniform(0.5, 0.8, nb))
        block_effect = np.where(rng.random(nb) < 0.10, rng.uniform(0.5, 1.2, nb), 0.0)
        block_effect *= np.where(rng.random(nb) < 0.5, -1.0, 1.0)
        self.block_effect = block_effect
        self.n_blocks = nb
        in_block = self.block >= 0
        # Block members are linear in z (intensities or scores), so rho is their Pearson r.
        recast = in_block & ~np.isin(self.kind, [INTENSITY, SCORE])
        self.kind[recast] = INTENSITY
        count = int(np.count_nonzero(recast))
        self.loc[recast] = 2 + 10 * rng.random(count)
        self.scale[recast] = 0.2 + 1.8 * rng.random(count)
        self.sign[~in_block] = 1.0

        # class signal on 1% of the free (non-block, not near-constant) features
        free = ~in_block & (self.kind != NEAR_CONSTANT)
        chosen = free & (rng.random(p) < 0.01)
        self.effect = np.where(chosen, rng.uniform(0.4, 1.2, p), 0.0)
        self.effect *= np.where(rng.random(p) < 0.5, -1.0, 1.0)

    def groups(self):
        return np.where(self.group_b, "group_b", "group_a")

    def tile(self, ti, tj):
        """Values (float64 with NaN gaps) of samples [64 ti, 64 ti + 64) x features
        [8192 tj, 8192 tj + 8192), clipped to the matrix."""
        i0, i1 = ti * TILE_ROWS, min(self.n, (ti + 1) * TILE_ROWS)
        j0, j1 = tj * TILE_COLS, min(self.p, (tj + 1) * TILE_COLS)
        r, m = i1 - i0, j1 - j0
        rng = np.random.default_rng([self.seed, 2, ti, tj])
        noise = rng.standard_normal((r, m))
        gap_draw = rng.random((r, m))
        kind = self.kind[j0:j1]
        g = self.group_b[i0:i1].astype(float)[:, None]
        z = noise + g * self.effect[j0:j1]

        blk = self.block[j0:j1]
        members = np.flatnonzero(blk >= 0)
        if members.size:
            # The block latent of these samples: one generator per tile row, shared by every
            # column tile, so members in different tiles see the same latent.
            latent = np.random.default_rng([self.seed, 1, ti]).standard_normal((r, self.n_blocks))
            latent += g * self.block_effect
            b = blk[members]
            rho = self.rho_of_block[b]
            z[:, members] = self.sign[j0:j1][members] * (np.sqrt(rho) * latent[:, b] +
                                                         np.sqrt(1 - rho) * noise[:, members])

        loc, scale = self.loc[j0:j1], self.scale[j0:j1]
        v = loc + scale * z
        sel = kind == ABUNDANCE
        v[:, sel] = np.exp(v[:, sel])
        sel = kind == FRACTION
        v[:, sel] = 1 / (1 + np.exp(-(loc[sel] + z[:, sel])))
        sel = np.flatnonzero(kind == COUNT)
        if sel.size:
            rate = loc[sel] * np.exp(g * self.effect[j0:j1][sel])
            v[:, sel] = rng.poisson(rate)
        sel = np.flatnonzero(kind == NEAR_CONSTANT)
        if sel.size:
            step = np.select([self.near_type[j0:j1][sel] == 1, self.near_type[j0:j1][sel] == 2],
                             [1e-5, 1e-3], 0.0)
            # a base value with 5 decimals, then whole steps: the text holds them exactly
            v[:, sel] = np.round(loc[sel], 5) + step * np.round(noise[:, sel])
        v[gap_draw < self.missing[j0:j1]] = np.nan
        return v

    def truth_lines(self, names):
        yield "feature\tkind\tdesigned_missing_rate\teffect\tblock\trho\tsign\n"
        for j in range(self.p):
            b = int(self.block[j])
            kind = KIND_NAMES[self.kind[j]]
            if self.kind[j] == NEAR_CONSTANT:
                kind += ("_exact", "_1e-10", "_1e-6")[self.near_type[j]]
            effect = (self.block_effect[b] if b >= 0 else self.effect[j]) + 0.0  # no "-0"
            yield (f"{names[j]}\t{kind}\t{self.missing[j]:.4g}\t{effect:.4g}\t"
                   f"{b + 1 if b >= 0 else ''}\t{self.rho_of_block[b] if b >= 0 else 0:.4g}\t"
                   f"{int(self.sign[j])}\n")


def planted_lines(design, layout, ids, names, label_line, label_column):
    """Yields the data lines of the planted matrix, band by band; returns the missing count."""
    n, p = design.n, design.p
    col_tiles = (p + TILE_COLS - 1) // TILE_COLS
    row_tiles = (n + TILE_ROWS - 1) // TILE_ROWS
    groups = design.groups()
    missing = 0
    line_no = 0

    def fmt_for(k, cache={}):
        if k not in cache:
            cache.clear()
            cache[k] = ",".join(["%.6g"] * k)
        return cache[k]

    def finish(name, text, tail):
        nonlocal line_no
        if "nan" in text:
            # ",nan" can only be a whole missing cell: every value follows a comma.
            text = text.replace(",nan", ",NA" if line_no % 2 == 0 else ",")
        line_no += 1
        return name + text + (("," + tail) if tail is not None else "") + "\n"

    if layout == "rows=samples":
        for ti in range(row_tiles):
            band = np.concatenate([design.tile(ti, tj) for tj in range(col_tiles)], axis=1)
            missing += int(np.isnan(band).sum())
            fmt = "," + fmt_for(p)
            for r in range(band.shape[0]):
                i = ti * TILE_ROWS + r
                yield finish(ids[i], fmt % tuple(band[r].tolist()),
                             groups[i] if label_column else None)
    else:
        for tj in range(col_tiles):
            band = np.concatenate([design.tile(ti, tj) for ti in range(row_tiles)], axis=0)
            missing += int(np.isnan(band).sum())
            band = np.ascontiguousarray(band.T)
            fmt = "," + fmt_for(n)
            for c in range(band.shape[0]):
                yield finish(names[tj * TILE_COLS + c], fmt % tuple(band[c].tolist()), None)
    return missing


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawTextHelpFormatter)
    ap.add_argument("--samples", type=int, default=1000)
    ap.add_argument("--features", type=int, default=50000)
    ap.add_argument("--layout", choices=["rows=samples", "rows=features"], default="rows=samples")
    ap.add_argument("--out", required=True)
    ap.add_argument("--gzip", action="store_true", help="gzip-compress the data file (level 6)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--scenario", choices=["plain", "planted"], default="plain",
                    help="plain: the reading benchmark's matrix; planted: class signal, gaps,\n"
                         "near-constant columns and correlated blocks, streamed in tiles")
    ap.add_argument("--missing", type=float, default=0.015, help="share of cells missing at random")
    ap.add_argument("--block-share", type=float, default=0.10,
                    help="planted: share of the features in correlated blocks")
    ap.add_argument("--label-column", default="group",
                    help="rows=samples: name of the label column ('' for none)")
    ap.add_argument("--label-line", action="store_true",
                    help="rows=features: write the labels as the line after the header")
    ap.add_argument("--sheet", help="also write a sample sheet (sample_id,batch,group)")
    ap.add_argument("--truth", help="planted: also write the design per feature (TSV)")
    a = ap.parse_args()
    if a.samples < 2 or a.features < 1:
        ap.error("--samples must be at least 2 and --features at least 1")
    if not 0 <= a.missing < 1 or not 0 <= a.block_share <= 1:
        ap.error("--missing must be in [0, 1) and --block-share in [0, 1]")
    if a.truth and a.scenario != "planted":
        ap.error("--truth needs --scenario planted")

    t0 = time.perf_counter()
    n, p = a.samples, a.features
    samples = [f"s{i + 1:05d}" for i in range(n)]
    features = [f"f{j + 1:07d}" for j in range(p)]
    planted = a.scenario == "planted"
    if planted:
        design = PlantedDesign(n, p, a.seed, a.missing, a.block_share)
        groups = design.groups()
    else:
        x, groups = make_matrix(n, p, a.seed, a.missing)

    opener = (lambda path: gzip.open(path, "wt", compresslevel=6, newline="")) if a.gzip else (
        lambda path: open(path, "w", newline="", buffering=1 << 22))
    text_bytes = 0
    with opener(a.out) as f:
        def put(s):
            nonlocal text_bytes
            text_bytes += len(s)  # ASCII only: characters = bytes
            f.write(s)

        label = a.label_column if a.layout == "rows=samples" else ""
        if a.layout == "rows=samples":
            put(",".join(["sample"] + features + ([label] if label else [])) + "\n")
        else:
            put(",".join(["feature"] + samples) + "\n")
            if a.label_line:
                put(",".join(["group"] + list(groups)) + "\n")
        if planted:
            lines = planted_lines(design, a.layout, samples, features, a.label_line, label)
            while True:
                try:
                    put(next(lines))
                except StopIteration as done:
                    missing = done.value
                    break
        elif a.layout == "rows=samples":
            for line in format_lines(samples, x, list(groups) if label else None):
                put(line)
        else:
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
    if a.truth:
        with open(a.truth, "w", newline="") as f:
            f.writelines(design.truth_lines(features))
    if not planted:
        missing = int(np.isnan(x).sum())
    print(f"wrote {a.out}: {n} samples x {p} features, {a.layout}, {a.scenario}, "
          f"{text_bytes / 1e6:.1f} MB of text, {missing} missing cells ({missing / (n * p):.2%}), "
          f"{time.perf_counter() - t0:.1f} s", file=sys.stderr)


if __name__ == "__main__":
    main()
