#!/usr/bin/python3
"""Reference checks for `pare project`, `pare reduce --components` and `pare apply` with a
projection, against numpy's exact SVD (numpy.linalg.svd, LAPACK gesdd) and plain numpy algebra.

Run as `/usr/bin/python3 projection_reference.py PATH_TO_PARE` (ctest does).

Data: random matrices with a decaying spectrum, generated here with a fixed seed:
X = U diag(s) V^T + noise with orthonormal U, V (numpy.linalg.qr of Gaussian matrices), singular
values s_i proportional to (i + 1)^-a for 200 components and Gaussian noise at the level of the
last one, then each feature scaled by a factor in [0.5, 3] and shifted by a mean in [-5, 5] (so
centring and --scale matter). Values are rounded to float32 and written with 9 significant digits,
which identifies a float32 uniquely (FLT_DECIMAL_DIG), so pare parses exactly the float32 values
the reference receives as float64.

`pare project` (several shapes, centred, --scale, --no-center; block Krylov and dense paths):
  explained ratio, eigenvalue, singular value   numpy.linalg.svd of the analysed matrix in float64
                                                ((x - mean) / sd with ddof 1, as pare documents)
  loadings and scores                           the same SVD, sign-normalised by SPEC section 4
  principal angles of the loading subspaces     scipy.linalg.subspace_angles
  plan.json centre and scale                    numpy.mean, numpy.std(ddof=1)
`pare reduce TRAIN --label class --keep N --components K` then `pare apply D/plan.json HELDOUT`:
  D2/scores.csv = ((D2/reduced.csv - centre) / scale) @ loadings, with centre and scale from
  D/plan.json and the loadings from D/loadings.tsv, in numpy; training scores of `reduce` against
  numpy.linalg.svd of D/reduced.csv; applying the plan to the training file reproduces
  D/scores.csv; one byte edited in D/loadings.tsv makes apply exit 3 naming the SHA-256 mismatch.

Prints one line per check, then `N passed, M failed`; exits 1 on any failure.
"""

import csv
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy.linalg

# ---- tolerances ------------------------------------------------------------------------------
# Explained ratios, eigenvalues and singular values: 1e-6 relative (the task's tolerance). pare
# stores the centred/scaled matrix in float32, which moves sigma^2 by about 1e-9 relative on these
# data, and Krylov eigenvalue errors are quadratic in the residual (Golub & Van Loan, Matrix
# Computations 4th ed., §8.1): far below 1e-6.
REL = 1e-6
# Principal angles between pare's and LAPACK's K-dimensional loading subspaces (the task's bound).
ANGLE = 1e-6
# Individual loading and score vectors: a per-component bound, computed from the reference
# spectrum, from the two ways pare's vectors may differ from the exact ones:
#   (1) Krylov stopping rule: every Ritz residual ||r_c|| <= TOLERANCE x theta_1 (pare's default,
#       theta = sigma^2); by the residual bound for symmetric eigenproblems (Davis-Kahan; Golub &
#       Van Loan §8.1.2) the vector error is <= ||r_c|| / delta_c, delta_c = distance from theta_c
#       to the neighbouring eigenvalues;
#   (2) float32 storage of the analysed matrix: each cell off by <= 2^-24 of itself, so the matrix
#       moves by ||E||_2 <= 2^-24 ||X||_F, and by Wedin's theorem singular vectors by <= ||E|| /
#       (distance from sigma_c to its neighbours).
# Allowed: twice the sum. For the dense path (1) does not apply but is kept (a looser bound).
TOLERANCE = 1e-8
F32 = 2.0 ** -24
# apply's scores against numpy's ((x - c) / s) @ L: the same formula in float64 on the same
# numbers (the values reduced.csv holds, read back as float32; the plan's centre and scale; the
# loadings file, written as shortest round-trip decimals), differing only in the order of the p
# products' sum: |difference| <= p eps sum_j |z_j L_jc|; allowed 1e-12 x sum_j |z_j L_jc|.
APPLY_REL = 1e-12

PROJECT_CASES = [
    # (name, n, p, K, options, spectrum exponent a, seed)
    ("wide 300x4000 centred", 300, 4000, 10, [], 1.0, 1),
    ("wide 300x4000 centred K 20", 300, 4000, 20, [], 0.7, 2),
    ("wide 500x2000 --scale", 500, 2000, 20, ["--scale"], 1.0, 3),
    ("tall 3000x300 --no-center", 3000, 300, 5, ["--no-center"], 1.0, 4),
    ("tall 3000x300 --scale", 3000, 300, 12, ["--scale"], 0.8, 5),
    ("wide 200x3000 dense --scale", 200, 3000, 8, ["--scale"], 1.0, 6),
]


from reference_common import Checks  # noqa: E402  (this folder is on sys.path)


# ---- data and files --------------------------------------------------------------------------

def decaying(n, p, a, seed, rank=200):
    """float32 matrix with singular values ~ (i + 1)^-a plus a noise floor, shifted and scaled."""
    rng = np.random.default_rng(seed)
    r = min(n, p, rank)
    u, _ = np.linalg.qr(rng.standard_normal((n, r)))
    v, _ = np.linalg.qr(rng.standard_normal((p, r)))
    s = math.sqrt(n * p) * (1.0 + np.arange(r)) ** (-a)
    noise = s[-1] / (math.sqrt(n) + math.sqrt(p))  # noise singular values about s[-1]
    x = (u * s) @ v.T + noise * rng.standard_normal((n, p))
    x = x * rng.uniform(0.5, 3.0, p) + rng.uniform(-5.0, 5.0, p)
    return x.astype(np.float32)


def write_csv(path, x, names, ids, labels=None, label_name="class"):
    """rows=samples CSV; NaN written as NA; 9 significant digits round-trip float32 exactly."""
    n, p = x.shape
    fmt = ",".join(["%.9g"] * p)
    with open(path, "w") as f:
        f.write("sample," + ",".join(names) + ("," + label_name if labels is not None else "") + "\n")
        for i in range(n):
            line = fmt % tuple(x[i].tolist())
            if np.isnan(x[i]).any():
                line = ",".join("NA" if t == "nan" else t for t in line.split(","))
            f.write(ids[i] + "," + line + ("," + labels[i] if labels is not None else "") + "\n")


def read_table(path, delimiter):
    with open(path, newline="") as f:
        rows = list(csv.reader(f, delimiter=delimiter))
    return rows[0], rows[1:]


def read_outputs(out_dir, k):
    """explained.tsv, loadings.tsv, scores.csv and plan.json of a run (numbers in float64)."""
    header, body = read_table(os.path.join(out_dir, "explained.tsv"), "\t")
    explained = {h: np.array([float(r[i]) for r in body]) if i else [r[0] for r in body]
                 for i, h in enumerate(header)}
    header_l, body_l = read_table(os.path.join(out_dir, "loadings.tsv"), "\t")
    loadings = np.array([[float(t) for t in r[1:]] for r in body_l])
    features = [r[0] for r in body_l]
    header_s, body_s = read_table(os.path.join(out_dir, "scores.csv"), ",")
    scores = np.array([[float(t) for t in r[1:k + 1]] for r in body_s])
    with open(os.path.join(out_dir, "plan.json")) as f:
        plan = json.load(f)
    return {"explained": explained, "explained_header": header, "loadings": loadings,
            "loadings_header": header_l, "features": features, "scores": scores,
            "scores_header": header_s, "sample_ids": [r[0] for r in body_s], "plan": plan}


def run(pare, args):
    start = time.monotonic()
    res = subprocess.run([pare] + args, capture_output=True, text=True)
    return res, time.monotonic() - start


# ---- reference -------------------------------------------------------------------------------

def sign_normalise(v, *others):
    """SPEC section 4: in each column of v the entry of largest magnitude is positive; the same
    flips are applied to the matching columns of `others`."""
    at = np.abs(v).argmax(axis=0)
    flip = np.sign(v[at, np.arange(v.shape[1])])
    return (v * flip,) + tuple(o * flip for o in others)


def exact_svd(x, center, scale):
    """The analysed matrix in float64 and numpy.linalg.svd of it (LAPACK gesdd)."""
    a = x.astype(np.float64)
    mean = a.mean(axis=0) if center else np.zeros(a.shape[1])
    a = a - mean
    sd = a.std(axis=0, ddof=1) if scale else np.ones(a.shape[1])
    sd = np.where(sd > 0, sd, 1.0)
    a = a / sd
    u, s, vt = np.linalg.svd(a, full_matrices=False)
    return a, mean, sd, u, s, vt.T


def vector_bounds(a, s, k):
    """Allowed error of each of the first k singular vectors (see the tolerances above)."""
    theta = s ** 2
    bounds = []
    for c in range(k):
        neighbours = [theta[c + 1]] + ([theta[c - 1]] if c > 0 else [])
        delta = min(abs(theta[c] - t) for t in neighbours)
        sneigh = [s[c + 1]] + ([s[c - 1]] if c > 0 else [])
        dsigma = min(abs(s[c] - t) for t in sneigh)
        krylov = TOLERANCE * theta[0] / delta
        storage = F32 * np.linalg.norm(a) / dsigma
        bounds.append(2 * (krylov + storage))
    return np.array(bounds)


def rel_dev(got, want):
    return float(np.max(np.abs(got - want) / np.abs(want)))


# ---- pare project ----------------------------------------------------------------------------

def project_case(checks, pare, tmp, case):
    name, n, p, k, options, a, seed = case
    x = decaying(n, p, a, seed)
    names = [f"f{j + 1:05d}" for j in range(p)]
    ids = [f"s{i + 1:05d}" for i in range(n)]
    path = os.path.join(tmp, "project.csv")
    write_csv(path, x, names, ids)
    out = os.path.join(tmp, "project-out")
    res, seconds = run(pare, ["project", path, "--components", str(k), "--out", out, "--quiet"] + options)
    if not checks.check(f"{name}: `pare project --components {k}{''.join(' ' + t for t in options)}` exits 0",
                        res.returncode == 0, f"{seconds:.2f} s" if res.returncode == 0 else res.stderr.strip()):
        return
    o = read_outputs(out, k)
    center, scale = "--no-center" not in options, "--scale" in options
    pa, mean, sd, u, s, v = exact_svd(x, center, scale)
    pr = o["plan"]["projection"]
    method = f"{pr['method']}, {pr['precision']} products, {pr['iterations']} blocks, residual {pr['residual']:.2g}"
    # which path: SPEC-independent fact of pare's design (projection.cpp): dense when
    # min(n, p) <= 256 or 2 (K + 10) >= min(n, p), else block Krylov in double below 2^24 cells,
    # on the n x n Gram matrix for a wide matrix of at most 32 (K + 10) samples
    if min(n, p) <= 256 or 2 * (k + 10) >= min(n, p):
        want_method = "dense"
    elif n <= p and n <= 32 * (k + 10):
        want_method = "block Krylov on the Gram matrix"
    else:
        want_method = "block Krylov"
    checks.check(f"{name}: method {want_method}", pr["method"] == want_method, method)

    # explained.tsv against numpy.linalg.svd: ratio = sigma^2 / ||X||_F^2 (pare's documented
    # definition, README), eigenvalue = sigma^2 / (n - 1), cumulative = running sum
    e = o["explained"]
    ok_header = o["explained_header"] == ["component", "eigenvalue", "ratio", "cumulative_ratio", "singular_value"]
    checks.check(f"{name}: explained.tsv columns and {k} rows", ok_header and len(e["component"]) == k,
                 "|".join(o["explained_header"]))
    ratio = s[:k] ** 2 / np.sum(pa ** 2)
    for column, want in [("ratio", ratio), ("eigenvalue", s[:k] ** 2 / (n - 1)), ("singular_value", s[:k]),
                         ("cumulative_ratio", np.cumsum(ratio))]:
        dev = rel_dev(e[column], want)
        checks.check(f"{name}: {column} vs numpy.linalg.svd (rel {REL:g})", dev <= REL, f"max rel dev {dev:.1e}")

    # plan.json centre and scale: numpy.mean and numpy.std(ddof=1) of the float32 values, both in
    # float64 (summation order only: 1e-12 of the column's scale)
    fc, fs = np.array(pr["feature_center"]), np.array(pr["feature_scale"])
    dev_c = float(np.max(np.abs(fc - mean) / np.maximum(np.abs(x).max(axis=0), 1e-300)))
    dev_s = float(np.max(np.abs(fs - sd) / sd))
    checks.check(f"{name}: plan.json feature_center/feature_scale vs numpy mean/std(ddof=1) (rel 1e-12)",
                 dev_c <= 1e-12 and dev_s <= 1e-12 and pr["components"] == k
                 and pr["center"] == center and pr["scale"] == scale,
                 f"centre {dev_c:.1e}, scale {dev_s:.1e}")

    # loadings and scores against the exact singular vectors, sign-normalised (SPEC section 4)
    lv = o["loadings"]
    checks.check(f"{name}: loadings.tsv is {p} x {k}, features in input order, PC1..PC{k}",
                 lv.shape == (p, k) and o["features"] == names
                 and o["loadings_header"] == ["feature"] + [f"PC{c + 1}" for c in range(k)])
    at = np.abs(lv).argmax(axis=0)
    checks.check(f"{name}: sign convention (largest |loading| positive in every component)",
                 bool(np.all(lv[at, np.arange(k)] > 0)))
    vref, uref = sign_normalise(v[:, :k], u[:, :k] * s[:k])
    bound = vector_bounds(pa, s, k)
    dl = np.linalg.norm(lv - vref, axis=0)
    checks.check(f"{name}: loadings vs numpy.linalg.svd V (per component ||dv|| <= Davis-Kahan/Wedin bound)",
                 bool(np.all(dl <= bound)),
                 f"max ||dv|| {dl.max():.1e}, bounds {bound.min():.0e}..{bound.max():.0e}, "
                 f"largest share of its bound {np.max(dl / bound):.2f}")
    sv = o["scores"]
    ds = np.linalg.norm(sv - uref, axis=0) / s[:k]
    checks.check(f"{name}: scores vs numpy U Sigma (per component ||ds|| / sigma <= the same bound)",
                 sv.shape == (n, k) and o["sample_ids"] == ids and bool(np.all(ds <= bound)),
                 f"max ||ds||/sigma {ds.max():.1e}, largest share of its bound {np.max(ds / bound):.2f}")
    angle = float(np.max(scipy.linalg.subspace_angles(lv, v[:, :k])))
    checks.check(f"{name}: largest principal angle to numpy's loading subspace < {ANGLE:g} "
                 "(scipy.linalg.subspace_angles)", angle < ANGLE, f"{angle:.1e} rad; {method}")


# ---- pare reduce --components, then pare apply -----------------------------------------------

def labelled(n_train, n_heldout, p, seed):
    """Train and held-out samples from one generator: correlated blocks of features, a third of
    them shifted by class (3 classes), background noise; a few gaps in the held-out file."""
    rng = np.random.default_rng(seed)
    n = n_train + n_heldout
    classes = np.array(["dry", "wet", "control"])[rng.integers(0, 3, n)]
    factors = rng.standard_normal((n, 40))
    load = rng.standard_normal((40, p)) * (rng.random((40, p)) < 0.05)
    x = factors @ load + rng.standard_normal((n, p)) * rng.uniform(0.3, 2.0, p)
    shift = {"dry": 1.0, "wet": -0.7, "control": 0.0}
    informative = rng.random(p) < 0.3
    x[:, informative] += np.array([shift[c] for c in classes])[:, None] * rng.uniform(0.2, 1.5, informative.sum())
    x = x + rng.uniform(0, 20, p)
    x = x.astype(np.float32)
    held = x[n_train:].copy()
    held[rng.random(held.shape) < 0.01] = np.nan
    return x[:n_train], list(classes[:n_train]), held, list(classes[n_train:])


def reduce_apply_checks(checks, pare, tmp):
    p, k, keep = 3000, 6, 150
    train, train_labels, held, held_labels = labelled(240, 80, p, 11)
    names = [f"probe{j + 1:05d}" for j in range(p)]
    train_path, held_path = os.path.join(tmp, "train.csv"), os.path.join(tmp, "heldout.csv")
    write_csv(train_path, train, names, [f"t{i + 1:04d}" for i in range(train.shape[0])], train_labels)
    # the held-out file lists the features in another order: apply matches them by name
    order = np.random.default_rng(12).permutation(p)
    write_csv(held_path, held[:, order], [names[j] for j in order],
              [f"h{i + 1:04d}" for i in range(held.shape[0])], held_labels)

    for extra in [[], ["--scale"]]:
        tag = "reduce --keep %d --components %d%s" % (keep, k, " --scale" if extra else "")
        d, d2 = os.path.join(tmp, "D"), os.path.join(tmp, "D2")
        for folder in (d, d2):
            shutil.rmtree(folder, ignore_errors=True)
        res, seconds = run(pare, ["reduce", train_path, "--label", "class", "--keep", str(keep), "--components",
                                  str(k), "--out", d, "--quiet"] + extra)
        if not checks.check(f"{tag}: exits 0", res.returncode == 0,
                            f"{seconds:.2f} s" if res.returncode == 0 else res.stderr.strip()):
            continue
        o = read_outputs(d, k)
        plan = o["plan"]
        pr = plan["projection"]
        kept = plan["kept"]["names"]
        checks.check(f"{tag}: plan keeps {keep} features and loadings.tsv lists them in plan order",
                     len(kept) == keep and o["features"] == kept and o["loadings"].shape == (keep, k))

        # training scores of reduce against numpy.linalg.svd of its own reduced.csv (the kept,
        # transformed features as float32); centred by pare's PCA in both cases
        header_r, body_r = read_table(os.path.join(d, "reduced.csv"), ",")
        cols = [header_r.index(nm) for nm in kept]
        reduced_train = np.array([[float(r[c]) for c in cols] for r in body_r], dtype=np.float32)
        pa, _, _, u, s, v = exact_svd(reduced_train, True, False)
        ratio = s[:k] ** 2 / np.sum(pa ** 2)
        dev = rel_dev(o["explained"]["ratio"], ratio)
        angle = float(np.max(scipy.linalg.subspace_angles(o["loadings"], v[:, :k])))
        checks.check(f"{tag}: explained ratios of the kept features vs numpy.linalg.svd of reduced.csv "
                     f"(rel {REL:g}) and principal angle < {ANGLE:g}", dev <= REL and angle < ANGLE,
                     f"max rel dev {dev:.1e}, angle {angle:.1e} ({pr['method']})")

        res, seconds = run(pare, ["apply", os.path.join(d, "plan.json"), held_path, "--out", d2, "--quiet"])
        if not checks.check(f"{tag}: `pare apply D/plan.json heldout.csv` exits 0", res.returncode == 0,
                            f"{seconds:.2f} s" if res.returncode == 0 else res.stderr.strip()):
            continue
        header_h, body_h = read_table(os.path.join(d2, "reduced.csv"), ",")
        checks.check(f"{tag}: apply's reduced.csv has the plan's features in order",
                     header_h[1:1 + keep] == kept, f"{len(header_h)} columns")
        # the values pare holds: reduced.csv's shortest float32 decimals, read back as float32
        z_in = np.array([[float(t) for t in r[1:1 + keep]] for r in body_h], dtype=np.float32).astype(np.float64)
        center, scale = np.array(pr["feature_center"]), np.array(pr["feature_scale"])
        z = (z_in - center) / scale
        want = z @ o["loadings"]  # numpy: ((reduced_heldout - center) / scale) @ loadings
        header_s, body_s = read_table(os.path.join(d2, "scores.csv"), ",")
        got = np.array([[float(t) for t in r[1:1 + k]] for r in body_s])
        allowed = APPLY_REL * (np.abs(z) @ np.abs(o["loadings"])) + 1e-300
        ok = got.shape == want.shape and bool(np.all(np.abs(got - want) <= allowed))
        worst = float(np.max(np.abs(got - want) / allowed)) if got.shape == want.shape else math.inf
        checks.check(f"{tag}: apply's scores.csv = numpy ((reduced - centre) / scale) @ loadings "
                     f"(|diff| <= {APPLY_REL:g} sum|z L|)", ok and [r[0] for r in body_s] == [r[0] for r in body_h],
                     f"{got.shape[0]} samples, largest share of the bound {worst:.2g}")

        # the plan replayed on the training file reproduces the training scores: apply computes
        # ((x - c) / s) L in double from the float32 values, reduce's PCA from the centred matrix
        # stored in float32 (each cell within 2^-24 of itself), so by Cauchy-Schwarz a score moves
        # by at most 2^-24 ||z_row|| (||L_c|| = 1); allowed twice that
        d3 = os.path.join(tmp, "D3")
        shutil.rmtree(d3, ignore_errors=True)
        res, _ = run(pare, ["apply", os.path.join(d, "plan.json"), train_path, "--out", d3, "--quiet"])
        if checks.check(f"{tag}: apply on the training file exits 0", res.returncode == 0, res.stderr.strip()):
            _, body3 = read_table(os.path.join(d3, "reduced.csv"), ",")
            z3 = (np.array([[float(t) for t in r[1:1 + keep]] for r in body3], dtype=np.float32)
                  .astype(np.float64) - center) / scale
            _, body_s3 = read_table(os.path.join(d3, "scores.csv"), ",")
            again = np.array([[float(t) for t in r[1:1 + k]] for r in body_s3])
            bound = 2 * F32 * np.linalg.norm(z3, axis=1)[:, None] + 1e-12
            share = float(np.max(np.abs(again - o["scores"]) / bound))
            checks.check(f"{tag}: apply on the training samples reproduces reduce's scores.csv "
                         "(<= 2^-23 ||z_row||)", share <= 1.0, f"largest share of the bound {share:.2g}")

    # one byte of D/loadings.tsv edited: apply must refuse (exit 3, SPEC section 6) and name the
    # SHA-256 mismatch
    d, d4 = os.path.join(tmp, "D"), os.path.join(tmp, "D4")
    loadings_path = os.path.join(d, "loadings.tsv")
    if os.path.exists(loadings_path):
        with open(loadings_path, "rb") as f:
            data = bytearray(f.read())
        at = data.index(b"\n") + 1
        while not chr(data[at]).isdigit() or data[at - 1] != ord("\t"):
            at += 1
        at += 1
        while not chr(data[at]).isdigit():
            at += 1
        data[at] = ord("1") if data[at] != ord("1") else ord("2")  # one digit of one loading
        with open(loadings_path, "wb") as f:
            f.write(bytes(data))
        res, _ = run(pare, ["apply", os.path.join(d, "plan.json"), held_path, "--out", d4, "--quiet"])
        message = res.stderr.strip()
        checks.check("edited loadings.tsv: apply exits 3 with a message naming the SHA-256 mismatch",
                     res.returncode == 3 and "SHA-256" in message and "loadings.tsv" in message
                     and "does not match" in message and message.startswith("pare: error:")
                     and not os.path.exists(os.path.join(d4, "scores.csv")),
                     f"exit {res.returncode}: {message}")


def main():
    if len(sys.argv) != 2:
        print("usage: projection_reference.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    started = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="pare-projection-ref-") as tmp:
        for case in PROJECT_CASES:
            project_case(checks, pare, tmp, case)
        reduce_apply_checks(checks, pare, tmp)
    checks.summary(f" ({time.monotonic() - started:.1f} s)")
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
