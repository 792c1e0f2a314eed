#!/usr/bin/python3
"""The `pare reduce` pipeline written with the general-purpose Python stack (Debian's numpy, pandas,
scipy, scikit-learn), for the side-by-side benchmark bench_reduce.py. Not a test; not run by CI.

    /usr/bin/python3 benchmarks/reference_pipeline.py DATA.csv --label group --components 50 \
        --out DIR [--drop-missing-above 0.2] [--min-variance 1e-8] [--bins 10] [--max-corr 0.9] \
        [--block 1024] [--seed 0]

It does what `pare reduce DATA --label group --components 50 --out DIR` does with the defaults
(rows=samples CSV, first column the sample id), with the definitions of SPEC section 4 and of
src/reduce.cpp, src/ranking.cpp, src/prune.cpp and src/projection.cpp:

 read      pandas.read_csv, C engine, float32 for the feature columns (pare's matrix is float32),
           low_memory=False (one pass over the file; with the default chunked pass it took
           18.5 s instead of 5.0 s on the 1,000 x 50,000 benchmark file),
           missing tokens as pare's defaults (empty, NA, NaN, nan, null, ?)
 missing   drop a feature whose share of missing cells is above --drop-missing-above
 impute    fill value = the mean of the observed values (float64 sum, stored as float32); the gaps
           are filled after scoring, as pare does: the variance filter and the scores use each
           feature's observed values, correlations and PCA the filled ones
 variance  sample variance (ddof 1) of the observed values, corrected two-pass formula; drop
           below --min-variance (fewer than 2 observed values: dropped)
 scoring   per feature, on its observed values: equal-frequency bins (value x of n gets
           floor(B L(x) / n), L(x) = values strictly below x, so ties share a bin), the bin x class
           table, plug-in MI in nats, Pearson chi-square on the non-empty rows and columns (p from
           scipy.stats.chi2.sf), one-way ANOVA F (p from scipy.stats.f.sf), Benjamini-Hochberg
           q-values; a feature with fewer than 2 observed values in some class scores 0 with p 1.
           Ranked by MI descending, ties in input order (a stable sort).
           Vectorised over features: one numpy.sort of a block of columns gives every bin edge,
           the class counts above each edge are matrix products (see bin_class_tables).
           sklearn.feature_selection.f_classif is not used: it cannot skip missing cells, and F
           here is defined on each feature's observed values.
 pruning   fill the gaps, then walk the features in rank order and drop one whose |Pearson r|
           with an already kept feature is above --max-corr. Blocked with matrix products
           (OpenBLAS sgemm through numpy.matmul) on standardised float32 columns: each block of
           candidates against all kept columns, then inside the block through its own Gram
           matrix; never a p x p matrix. Pairs within the float32 error bound of the threshold
           are decided by r in float64, so the decisions are those of the exact walk.
 PCA       sklearn.decomposition.PCA(n_components=K, svd_solver="randomized") on the kept
           features in rank order (centred, float32 as read), signs normalised as SPEC section 4
           says (the loading of largest magnitude positive); scores, loadings, explained variance
 write     ranking.tsv, selection-log.tsv, reduced.csv (kept columns, filled, "%.9g" which reads
           back as the same float32; ids and numbers only), samples.tsv (ids, labels), scores.csv, loadings.tsv, explained.tsv, kept-features.txt
           (the kept names in final order, one a line) and run.json (seconds per step, peak RSS,
           BLAS)

Ties: MI * N = sum v ln v - sum r ln r - sum c ln c + N ln N (cells v, bin totals r, class totals
c), so two features whose tables have the same multisets of cells, bin totals and class totals and
the same N have equal MI in exact arithmetic, while the rounded sums of their cell terms can differ
in the last bits. Such features are given the same MI (the value of the first of them), so the
stable sort keeps them in input order, as the definition asks ("score descending, ties in input
order"). The 1,000 x 50,000 benchmark data hold 102 groups of such features; without this, about
half of them come out in an order set by rounding.

Prints one line per step; exits 1 on bad input.
"""

import argparse
import json
import os
import resource
import sys
import time

T_START = time.perf_counter()

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import scipy.stats  # noqa: E402
from sklearn.decomposition import PCA  # noqa: E402

T_IMPORTS = time.perf_counter() - T_START

NA_TOKENS = ["", "NA", "NaN", "nan", "null", "?"]  # pare's defaults (SPEC section 3)
COLUMN_BLOCK = 4096  # columns per vectorised pass: bounds the float64 temporaries


def blas_description():
    """The BLAS numpy calls, from threadpoolctl (scikit-learn's dependency)."""
    try:
        import threadpoolctl
    except ImportError:
        return "unknown (threadpoolctl missing; see numpy.show_config())"
    parts = []
    for lib in threadpoolctl.threadpool_info():
        if lib.get("user_api") != "blas":
            continue
        parts.append(f"{lib.get('internal_api')} {lib.get('version')} "
                     f"({lib.get('architecture', '?')} kernels, {lib.get('threading_layer', '?')}, "
                     f"{lib.get('num_threads')} threads) {lib.get('filepath')}")
    return "; ".join(parts) or "none found by threadpoolctl"


def g3(v):
    return "%.3g" % v


def column_blocks(count, size=COLUMN_BLOCK):
    for start in range(0, count, size):
        yield start, min(count, start + size)


# ---- scoring ---------------------------------------------------------------------------------

def bin_class_tables(xb, codes, n_classes, bins):
    """Equal-frequency bin x class tables of the columns of xb (n x w float32, NaN = gap), as
    float64 counts w x bins x classes, plus the observed count per column.

    Value x of a column with m observed values is in bin floor(B L(x) / m), L(x) = values strictly
    below x, so bin(x) >= b exactly when L(x) >= t_b = ceil(b m / B), that is when x is above the
    t_b-th smallest value s[t_b - 1]. So one sort per column gives the B - 1 bin edges, and the
    counts per class of values above each edge are matrix products with the class indicators; no
    argsort (numpy's float32 sort is an AVX-512 quicksort, its argsort is not: 7x faster here)."""
    n, w = xb.shape
    gaps = np.isnan(xb)
    nobs = n - gaps.sum(axis=0)
    s = np.sort(xb, axis=0)  # gaps (NaN) sort last
    onehot = np.zeros((n_classes, n), dtype=np.float32)
    onehot[codes, np.arange(n)] = 1
    above = np.empty((bins + 1, n_classes, w))  # values in bin b or higher, per class
    above[0] = onehot @ (~gaps).astype(np.float32)
    above[bins] = 0
    for b in range(1, bins):
        t = (b * nobs + bins - 1) // bins
        edge = np.take_along_axis(s, np.maximum(t - 1, 0)[None, :], axis=0)
        above[b] = onehot @ (xb > edge).astype(np.float32)  # a gap compares false
    table = above[:-1] - above[1:]  # bins x classes x w
    return np.ascontiguousarray(table.transpose(2, 0, 1)), nobs


def mi_and_chi2(tables):
    """Plug-in MI (nats), Pearson chi-square with df, and the tie key of each table
    (w x rows x cols of counts)."""
    w, rows, cols = tables.shape
    row_sum = tables.sum(axis=2)
    col_sum = tables.sum(axis=1)
    total = row_sum.sum(axis=1)
    positive = tables > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = tables * total[:, None, None] / (row_sum[:, :, None] * col_sum[:, None, :])
        terms = (tables / total[:, None, None]) * np.log(np.where(positive, ratio, 1.0))
    mi = np.maximum(np.where(positive, terms, 0.0).sum(axis=(1, 2)), 0.0)
    # MI * N = sum v ln v - sum r ln r - sum c ln c + N ln N over cells v, bin totals r, class
    # totals c: the MI of two tables is equal in exact arithmetic when these multisets and N are.
    # That happens (bins in another order, classes swapped in some bins, cells rearranged between
    # bins of equal totals), and the rounding of the sum then differs in the last bits; the key
    # lets such ties be found and kept in input order.
    key = np.concatenate([np.sort(tables.reshape(w, rows * cols), axis=1), np.sort(row_sum, axis=1),
                          np.sort(col_sum, axis=1), total[:, None]], axis=1).astype(np.int64)

    used_rows = (row_sum > 0).sum(axis=1)
    used_cols = (col_sum > 0).sum(axis=1)
    df = np.maximum(0, (used_rows - 1) * (used_cols - 1))
    with np.errstate(divide="ignore", invalid="ignore"):
        expected = row_sum[:, :, None] * col_sum[:, None, :] / total[:, None, None]
        terms = np.where(expected > 0, (tables - expected) ** 2 / expected, 0.0)
    chi2 = np.where(df > 0, terms.sum(axis=(1, 2)), 0.0)
    return mi, chi2, df, key


def anova_f(x64, gaps, codes, n_classes, mean):
    """One-way ANOVA F of each column of x64 (n x w float64, gaps arbitrary) on its observed
    values; class means first, then the within-class squares about them."""
    observed = ~gaps
    count = np.stack([observed[codes == c].sum(axis=0) for c in range(n_classes)])
    xz = np.where(gaps, 0.0, x64)
    sums = np.stack([xz[codes == c].sum(axis=0) for c in range(n_classes)])
    with np.errstate(divide="ignore", invalid="ignore"):
        class_mean = sums / count
        between = (count * (class_mean - mean) ** 2).sum(axis=0)
        d = np.where(gaps, 0.0, x64 - class_mean[codes])
        within = (d * d).sum(axis=0)
        nobs = count.sum(axis=0)
        df1, df2 = n_classes - 1, nobs - n_classes
        f = (between / df1) / (within / df2)
    separates = within <= 0
    f = np.where(separates, np.inf, f)
    return f, df1, df2


def bh(p):
    """Benjamini-Hochberg step-up q-values, in the order of p."""
    m = p.size
    order = np.argsort(p, kind="stable")
    scaled = p[order] * m / np.arange(1, m + 1)
    q_sorted = np.minimum(1.0, np.minimum.accumulate(scaled[::-1])[::-1])
    q = np.empty(m)
    q[order] = q_sorted
    return q


def score_features(x, features, codes, n_classes, bins, mean, variance):
    """MI, chi-square (p, q), F (p, q) of the columns `features` of x on their observed values."""
    m = features.size
    mi, chi2, chi2_df, f = np.zeros(m), np.zeros(m), np.zeros(m, dtype=np.int64), np.zeros(m)
    f_df2 = np.zeros(m)
    defined = np.ones(m, dtype=bool)
    keys = []
    for a, b in column_blocks(m, 2048):
        cols = features[a:b]
        xb = x[:, cols]
        gaps = np.isnan(xb)
        per_class = np.stack([(~gaps[codes == c]).sum(axis=0) for c in range(n_classes)])
        constant = np.nanmin(xb, axis=0) == np.nanmax(xb, axis=0)
        # As pare (SPEC section 9): MI and chi-square for every non-constant feature; F when
        # more values are observed than classes. (anova_f uses every class, which is the same
        # as pare's F over the observed classes when each class has an observed value, as in
        # the benchmark data; this script does not handle a class absent from a feature.)
        defined[a:b] = ~constant
        f_ok = ~constant & ((per_class >= 1).sum(axis=0) >= 2) & (per_class.sum(axis=0) > n_classes)
        tables, _ = bin_class_tables(xb, codes, n_classes, bins)
        mi[a:b], chi2[a:b], chi2_df[a:b], key = mi_and_chi2(tables)
        keys.append(key)
        f[a:b], _, f_df2[a:b] = anova_f(xb.astype(np.float64), gaps, codes, n_classes, mean[cols])
        f[a:b][~f_ok] = 0.0
    # Features without a defined result score 0 with p 1 (pare's few_values / constant flags).
    mi[~defined] = chi2[~defined] = f[~defined] = 0.0
    # Exact MI ties get one value (that of the first of them), so the stable ranking sort keeps
    # them in input order.
    scored = np.flatnonzero(defined)
    if scored.size:
        _, first, group = np.unique(np.concatenate(keys)[scored], axis=0, return_index=True,
                                    return_inverse=True)
        mi[scored] = mi[scored[first[group.reshape(-1)]]]
    chi2_df[~defined] = 0
    chi2_p = np.where(chi2_df > 0, scipy.stats.chi2.sf(chi2, np.maximum(chi2_df, 1)), 1.0)
    chi2_p[~(chi2 > 0)] = 1.0
    with np.errstate(invalid="ignore"):
        f_p = np.where(np.isinf(f), 0.0, scipy.stats.f.sf(f, n_classes - 1, np.maximum(f_df2, 1)))
    f_p[~(f > 0)] = 1.0
    return {"mi": mi, "chi2": chi2, "chi2_p": chi2_p, "chi2_q": bh(chi2_p), "f": f, "f_p": f_p,
            "f_q": bh(f_p), "variance": variance[features], "chi2_df": chi2_df}


# ---- correlation pruning -------------------------------------------------------------------

def prune(x, candidates, limit, block, max_kept=0):
    """Greedy pruning in candidate order (x: n x p float32, no gaps in the candidates' columns).
    Returns (kept mask over candidates, partner position or -1, r with the partner, candidates
    examined). With max_kept the walk stops at the max_kept-th kept candidate, as pare's does:
    the ones after it are not examined."""
    n = x.shape[0]
    count = candidates.size
    # Forward error bound of a float32 dot product of two unit vectors of length n (gamma_n <=
    # n 2^-24 times sum |a_i b_i| <= 1; Higham, Accuracy and Stability of Numerical Algorithms,
    # 2nd ed., section 3.1), doubled for the rounding of z itself, plus 1e-6: pairs inside this
    # margin of the threshold are decided in float64. pare uses the same bound (src/prune.cpp).
    margin = 1e-6 + 2.0 * n * 5.96e-8
    low, high = limit - margin, limit + margin
    kept = np.zeros(count, dtype=bool)
    partner = np.full(count, -1)
    partner_r = np.zeros(count)
    means = np.zeros(count)
    norms = np.zeros(count)
    # Standardised kept columns, n x capacity, filled left to right (untouched pages cost nothing).
    zk = np.empty((count, n), dtype=np.float32)  # row k = kept column k (so zk[:nk] @ zb is sgemm)
    kept_pos = np.empty(count, dtype=np.int64)
    nk = 0

    def exact_r(pa, pb):
        if norms[pa] == 0 or norms[pb] == 0:
            return 0.0
        a = x[:, candidates[pa]].astype(np.float64) - means[pa]
        b = x[:, candidates[pb]].astype(np.float64) - means[pb]
        return float(np.clip(a @ b / (norms[pa] * norms[pb]), -1.0, 1.0))

    for start in range(0, count, block):
        stop = min(count, start + block)
        w = stop - start
        xb = x[:, candidates[start:stop]].astype(np.float64)
        mu = xb.mean(axis=0)
        xb -= mu
        nrm = np.sqrt(np.einsum("ij,ij->j", xb, xb))
        means[start:stop], norms[start:stop] = mu, nrm
        zb = (xb * np.where(nrm > 0, 1.0 / np.where(nrm > 0, nrm, 1.0), 0.0)).astype(np.float32)
        del xb
        dropped = np.zeros(w, dtype=bool)
        if nk:
            c = zk[:nk] @ zb  # nk x w
            top = np.maximum(c.max(axis=0), -c.min(axis=0))
            for b in np.flatnonzero(top > low):
                col = np.abs(c[:, b])
                if top[b] > high:
                    who = kept_pos[int(np.argmax(col))]
                    dropped[b] = True
                    partner[start + b], partner_r[start + b] = who, exact_r(who, start + b)
                    continue
                best = -1.0  # largest exact |r| above the limit, first in rank order on a tie
                for k in np.flatnonzero(col > low):
                    r = exact_r(kept_pos[k], start + b)
                    if abs(r) > limit and abs(r) > best:
                        best = abs(r)
                        partner[start + b], partner_r[start + b] = kept_pos[k], r
                dropped[b] = best >= 0
            del c
        # Inside the block: only candidates with a near partner earlier in the block need the
        # sequential walk; the others are kept unless the kept set dropped them.
        g = zb.T @ zb
        near = np.triu(np.abs(g) > low, 1)
        keep_b = ~dropped
        for b in np.flatnonzero(near.any(axis=0) & keep_b):
            earlier = np.flatnonzero(near[:b, b] & keep_b[:b])
            if earlier.size == 0:
                continue
            vals = np.abs(g[earlier, b])
            if vals.max() > high:
                j = earlier[int(np.argmax(vals))]
                keep_b[b] = False
                partner[start + b], partner_r[start + b] = start + j, exact_r(start + j, start + b)
                continue
            for j in earlier:
                r = exact_r(start + j, start + b)
                if abs(r) > limit and (keep_b[b] or abs(r) > abs(partner_r[start + b])):
                    keep_b[b] = False
                    partner[start + b], partner_r[start + b] = start + j, r
        new = np.flatnonzero(keep_b)
        if max_kept and nk + new.size >= max_kept:
            new = new[:max_kept - nk]
            last = start + new[-1]
            kept[start + new] = True
            partner[last + 1:] = -1
            partner_r[last + 1:] = 0
            return kept, partner, partner_r, last + 1
        zk[nk:nk + new.size] = zb[:, new].T
        kept_pos[nk:nk + new.size] = start + new
        kept[start + new] = True
        nk += new.size
    return kept, partner, partner_r, count


# ---- writing -------------------------------------------------------------------------------

def write_matrix_csv(path, header, ids, values, tail=None):
    """Rows of `values` (float32) as `id,v1,...[,tail]` with "%.9g", which reads back as the same
    float32; one %-format per line keeps the per-value cost in C."""
    fmt = "," + ",".join(["%.9g"] * values.shape[1])
    with open(path, "w", newline="", buffering=1 << 22) as f:
        f.write(header + "\n")
        for i in range(values.shape[0]):
            line = ids[i] + fmt % tuple(values[i].tolist())
            if tail is not None:
                line += "," + tail[i]
            f.write(line + "\n")


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("data")
    ap.add_argument("--label", required=True)
    ap.add_argument("--components", type=int, default=50)
    ap.add_argument("--out", required=True)
    ap.add_argument("--drop-missing-above", type=float, default=0.2)
    ap.add_argument("--min-variance", type=float, default=1e-8)
    ap.add_argument("--bins", type=int, default=10)
    ap.add_argument("--max-corr", type=float, default=0.9)
    ap.add_argument("--keep", type=int, default=0, help="stop pruning at K kept features (0 = all)")
    ap.add_argument("--block", type=int, default=1024, help="candidates per matrix product")
    ap.add_argument("--seed", type=int, default=0, help="random_state of the randomized SVD")
    a = ap.parse_args()
    os.makedirs(a.out, exist_ok=True)
    seconds = {"imports": T_IMPORTS}
    clock = [time.perf_counter()]

    def lap(step):
        now = time.perf_counter()
        seconds[step] = seconds.get(step, 0.0) + now - clock[0]
        clock[0] = now
        print(f"  {step:<9} {seconds[step]:8.2f} s", flush=True)

    # read
    with open(a.data, newline="") as f:
        header = next(iter(f)).rstrip("\r\n").split(",")
    id_name = header[0]
    if a.label not in header[1:]:
        print(f"reference_pipeline.py: no column {a.label!r} in {a.data}", file=sys.stderr)
        return 1
    dtypes = dict.fromkeys(header[1:], np.float32)
    dtypes[a.label] = str
    df = pd.read_csv(a.data, index_col=0, dtype=dtypes, low_memory=False, keep_default_na=False,
                     na_values=NA_TOKENS)
    labels = df.pop(a.label).to_numpy(dtype=str)
    names = np.array(df.columns, dtype=object)
    ids = [str(s) for s in df.index]
    x = df.to_numpy(dtype=np.float32)  # n x p; column-major when pandas kept one float32 block
    del df
    if not x.flags.f_contiguous:
        x = np.asfortranarray(x)
    n, p = x.shape
    classes, codes = np.unique(labels, return_inverse=True)  # sorted names, like pare
    if classes.size < 2:
        print("reference_pipeline.py: the label has fewer than 2 classes", file=sys.stderr)
        return 1
    lap("read")

    # 1. missing filter
    n_obs = np.empty(p, dtype=np.int64)
    for s, e in column_blocks(p):
        n_obs[s:e] = n - np.isnan(x[:, s:e]).sum(axis=0)
    missing_rate = (n - n_obs) / n
    step = np.full(p, "", dtype=object)
    reason = np.full(p, "", dtype=object)
    gone = missing_rate > a.drop_missing_above
    step[gone] = "missing"
    reason[gone] = [f"missing rate {g3(r)} > {g3(a.drop_missing_above)}" for r in missing_rate[gone]]
    alive = np.flatnonzero(~gone)
    lap("missing")

    # 2. impute: learn the fill values (the mean of the observed values)
    mean = np.full(p, np.nan)
    for s, e in column_blocks(alive.size):
        cols = alive[s:e]
        mean[cols] = np.nansum(x[:, cols], axis=0, dtype=np.float64) / n_obs[cols]
    fill = np.where(n_obs > 0, mean, 0.0).astype(np.float32)
    lap("impute")

    # 4. variance filter (step 3, the optional transform, is off), on the observed values
    variance = np.full(p, np.nan)
    for s, e in column_blocks(alive.size):
        cols = alive[s:e]
        d = x[:, cols].astype(np.float64) - mean[cols]
        np.nan_to_num(d, copy=False, nan=0.0)
        squares, deviations = np.einsum("ij,ij->j", d, d), d.sum(axis=0)
        k = n_obs[cols]
        with np.errstate(divide="ignore", invalid="ignore"):
            v = (squares - deviations * deviations / k) / (k - 1)
        variance[cols] = np.where(k >= 2, np.maximum(v, 0.0), np.nan)
    v_alive = variance[alive]
    few = np.isnan(v_alive)
    low_var = ~few & (v_alive < a.min_variance)
    step[alive[few]] = "variance"
    reason[alive[few]] = "fewer than 2 observed values"
    step[alive[low_var]] = "variance"
    reason[alive[low_var]] = [f"variance {g3(v)} < {g3(a.min_variance)}" for v in v_alive[low_var]]
    alive = alive[~few & ~low_var]
    lap("variance")

    # 5. relevance: score on the observed values, rank by MI (stable: ties in input order)
    scores = score_features(x, alive, codes, classes.size, a.bins, mean, variance)
    order = np.argsort(-scores["mi"], kind="stable")
    candidates = alive[order]
    lap("scoring")

    # fill the candidates' gaps (pare counts this in its redundancy step; so is it here)
    for s, e in column_blocks(candidates.size):
        cols = candidates[s:e]
        xb = x[:, cols]
        x[:, cols] = np.where(np.isnan(xb), fill[cols], xb)
    # 6. redundancy
    kept_mask, partner, partner_r, examined = prune(x, candidates, a.max_corr, a.block, a.keep)
    kept = candidates[kept_mask]
    rank_of = np.zeros(candidates.size, dtype=np.int64)
    rank_of[kept_mask] = np.arange(1, kept.size + 1)
    # 7. top: with --keep, the candidates the walk did not reach
    for j in candidates[examined:]:
        step[j] = "top"
        reason[j] = (f"not reached: the first {a.keep} were already kept (--keep {a.keep}), "
                     "so it was not compared for redundancy")
    for i in np.flatnonzero(~kept_mask[:examined]):
        j = candidates[i]
        step[j] = "redundancy"
        reason[j] = (f"|r| = {abs(partner_r[i]):.3f} with {names[candidates[partner[i]]]} "
                     f"(kept, rank {rank_of[partner[i]]})")
    lap("pruning")

    # 8. PCA of the kept features, centred
    xk = x[:, kept]
    pca = PCA(n_components=a.components, svd_solver="randomized", random_state=a.seed)
    pc_scores = pca.fit_transform(xk).astype(np.float64)
    loadings = pca.components_.T.astype(np.float64)  # kept x K
    # SPEC section 4: in each component the loading of largest magnitude is positive
    flip = np.sign(loadings[np.argmax(np.abs(loadings), axis=0), np.arange(a.components)])
    flip[flip == 0] = 1
    loadings *= flip
    pc_scores *= flip
    # pare's explained.tsv: eigenvalue = sigma^2 / (n - 1); ratio = sigma^2 / squared Frobenius
    # norm of the centred matrix (the PCA's own explained_variance_ratio_ is the same ratio)
    sigma = pca.singular_values_.astype(np.float64)
    eigen = sigma ** 2 / (n - 1)
    ratio = pca.explained_variance_ratio_.astype(np.float64)
    lap("pca_fit")
    kept_names = list(names[kept])
    pcs = [f"PC{c + 1}" for c in range(a.components)]
    # as pare: scores.csv and reduced.csv hold ids and numbers only; the labels go to samples.tsv
    sc = pd.DataFrame(pc_scores, index=pd.Index(ids, name="sample"), columns=pcs)
    sc.to_csv(os.path.join(a.out, "scores.csv"))
    pd.DataFrame(loadings, index=pd.Index(kept_names, name="feature"), columns=pcs).to_csv(
        os.path.join(a.out, "loadings.tsv"), sep="\t")
    pd.DataFrame({"component": pcs, "eigenvalue": eigen, "ratio": ratio,
                  "cumulative_ratio": np.cumsum(ratio), "singular_value": sigma}).to_csv(
        os.path.join(a.out, "explained.tsv"), sep="\t", index=False)
    lap("pca_write")

    # write
    with open(os.path.join(a.out, "kept-features.txt"), "w") as f:
        f.write("\n".join(kept_names) + "\n")
    pos = np.full(p, -1)
    pos[alive] = np.arange(alive.size)
    ki = pos[kept]
    cols = {"rank": np.arange(1, kept.size + 1), "feature": kept_names}
    for key in ("mi", "chi2", "chi2_p", "chi2_q", "f", "f_p", "f_q", "variance"):
        cols[key] = scores[key][ki]
    cols["missing_rate"] = missing_rate[kept]
    cols["chi2_df"] = scores["chi2_df"][ki]
    cols["index"] = kept + 1
    pd.DataFrame(cols).to_csv(os.path.join(a.out, "ranking.tsv"), sep="\t", index=False,
                              float_format="%.17g")
    status = np.full(p, "dropped", dtype=object)
    status[kept] = "kept"
    step[kept] = "kept"
    rank = np.full(p, "", dtype=object)
    rank[kept] = [str(r) for r in range(1, kept.size + 1)]
    for j, r in zip(kept, range(1, kept.size + 1)):
        reason[j] = f"rank {r} by mi ({g3(scores['mi'][pos[j]])})"
    log = pd.DataFrame({"feature": names, "index": np.arange(1, p + 1), "status": status,
                        "step": step, "reason": reason, "rank": rank})
    for key in ("mi", "chi2", "chi2_p", "chi2_q", "f", "f_p", "f_q"):
        col = np.full(p, np.nan)
        col[alive] = scores[key]
        log[key] = col
    log["variance"] = variance
    log["missing_rate"] = missing_rate
    log.to_csv(os.path.join(a.out, "selection-log.tsv"), sep="\t", index=False, na_rep="NA",
               float_format="%.17g")
    write_matrix_csv(os.path.join(a.out, "reduced.csv"), ",".join([id_name] + kept_names), ids,
                     np.ascontiguousarray(x[:, kept]))
    pd.DataFrame({"sample": ids, a.label: labels}).to_csv(os.path.join(a.out, "samples.tsv"), sep="\t",
                                                         index=False)
    lap("write")

    seconds["pca"] = seconds["pca_fit"] + seconds["pca_write"]
    seconds["total_in_process"] = time.perf_counter() - T_START
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # kilobytes on Linux
    counts = {"input": p, "missing": int(p - np.count_nonzero(gone)), "variance": int(alive.size),
              "kept": int(kept.size)}
    run = {"seconds": seconds, "peak_rss_kb": peak_kb, "blas": blas_description(),
           "versions": {"numpy": np.__version__, "pandas": pd.__version__,
                        "scipy": scipy.__version__, "sklearn": __import__("sklearn").__version__},
           "counts": counts, "samples": n, "features": p, "explained_ratio": ratio.tolist(),
           "eigenvalues": eigen.tolist()}
    with open(os.path.join(a.out, "run.json"), "w") as f:
        json.dump(run, f, indent=1)
    print(f"reference pipeline: {n} samples x {p} features -> {kept.size} kept; "
          f"peak RSS {peak_kb / 2**20:.2f} GiB; BLAS {run['blas']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
