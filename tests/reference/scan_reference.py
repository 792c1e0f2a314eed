#!/usr/bin/python3
"""Reference checks for `pare scan`: profile.tsv against numpy on the same values.

Run as `/usr/bin/python3 scan_reference.py PATH_TO_PARE` (ctest does). The data are the open
datasets shipped by Debian's python3-sklearn 1.2.1 (/usr/lib/python3/dist-packages/sklearn/
datasets/data/, layout in /work/shared/CHECKS.md section 10); feature names come from
sklearn.datasets.load_*(). Every file pare reads is written here, in a temporary folder, from the
original decimal text, so pare and numpy see exactly the same numbers.

Prints one line per check, then `N passed, M failed`; exits 1 on any failure. When a dataset file
is missing it prints a skip and exits 0, unless CI=true, where a missing file is a failure
(scripts/install-deps.sh installs python3-sklearn, so CI always has the files).
"""

import csv
import gzip
import importlib.util
import math
import os
import re
import subprocess
import sys
import tempfile
import warnings
from fractions import Fraction

DATA_DIR = "/usr/lib/python3/dist-packages/sklearn/datasets/data"
DATASETS = {
    # name: (file, sklearn loader)
    "breast_cancer": ("breast_cancer.csv", "load_breast_cancer"),
    "wine": ("wine_data.csv", "load_wine"),
    "iris": ("iris.csv", "load_iris"),
}

# Tolerances (relative unless said otherwise).
# pare stores the matrix as float32 and accumulates in double (two-pass mean/variance).
# - Against numpy on float64 copies of the float32-rounded values, the only difference is double
#   rounding in the sums (~n * 1.1e-16 relative): 1e-9 leaves a wide margin.
REL_VS_F32 = 1e-9
# - Against numpy on the original float64 values, float32 storage rounds each value by up to
#   2^-24 ~ 6e-8 relative (float32 unit roundoff). The mean moves by at most that much; the
#   variance by ~2 * 6e-8 * |x|/sd in the worst case, and the rounding errors largely cancel
#   over hundreds of values, so 1e-6 holds for these datasets (the worst error seen is printed).
REL_VS_F64 = 1e-6
# - missing_rate is missing / (n + missing) in both; allow for a different but exact-to-ulp
#   formulation.
REL_RATE = 1e-12
# - A constant column has variance 0 exactly in real arithmetic; in floating point the rounded
#   mean can leave deviations of order n * 2^-53 * |x| (< 1e-11 |x| for n < 1e5), so sd and
#   variance are compared with an absolute floor of 1e-10 * max|x| (squared for the variance).
SD_FLOOR = 1e-10

# Default profile thresholds, as documented in include/pare/profile.h (ProfileOptions).
MOSTLY_MISSING = 0.2
NEAR_CONSTANT_CV = 1e-3


from reference_common import Checks  # noqa: E402  (this folder is on sys.path)


def f32_round(text):
    """The float32 nearest to the decimal `text` (ties to even), as a Python float.

    numpy converts text to float32 through float64, which can round twice; this is the correctly
    rounded value that a direct parser (fast_float in pare) must produce.
    reference: exact rational arithmetic (Python fractions), IEEE 754 round-to-nearest-even.
    """
    import numpy as np

    exact = Fraction(text)
    candidate = np.float32(float(text))
    best = candidate
    best_err = abs(Fraction(float(candidate)) - exact)
    for neighbour in (np.nextafter(candidate, np.float32(-np.inf)),
                      np.nextafter(candidate, np.float32(np.inf))):
        err = abs(Fraction(float(neighbour)) - exact)
        if err < best_err or (err == best_err and int(neighbour.view(np.uint32)) % 2 == 0):
            best, best_err = neighbour, err
    return float(best)


class Dataset:
    """A matrix as decimal text (None = missing), names, ids and labels."""

    def __init__(self, name, cells, feature_names, labels, label_name):
        self.name = name
        self.cells = cells  # list of rows (samples) of str or None
        self.feature_names = feature_names
        self.labels = labels
        self.label_name = label_name
        self.sample_ids = [f"s{i + 1:04d}" for i in range(len(cells))]

    def arrays(self):
        """(original float64 values, float64 of the float32-rounded values), NaN = missing."""
        import numpy as np

        cache = {}
        n, p = len(self.cells), len(self.feature_names)
        x64 = np.full((n, p), np.nan)
        x32 = np.full((n, p), np.nan)
        for i, row in enumerate(self.cells):
            for j, text in enumerate(row):
                if text is None:
                    continue
                x64[i, j] = float(text)
                if text not in cache:
                    cache[text] = f32_round(text)
                x32[i, j] = cache[text]
        return x64, x32


def read_debian_dataset(name, file_name, checks):
    """Reads a Debian sklearn CSV: first line `n,p,class names...`, then p values and a label."""
    path = os.path.join(DATA_DIR, file_name)
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    head = rows[0]
    n, p = int(head[0]), int(head[1])
    class_names = head[2:]
    body = [r for r in rows[1:] if r]
    # reference: the file's own first line (n, p), as described in CHECKS.md section 10
    checks.check(f"{name}: file has {n} rows of {p} values + label",
                 len(body) == n and all(len(r) == p + 1 for r in body),
                 f"{len(body)} rows")
    cells = [r[:p] for r in body]
    labels = [class_names[int(r[p])] for r in body]
    return cells, labels, class_names


def load_dataset(name, checks):
    import numpy as np
    import sklearn.datasets

    file_name, loader = DATASETS[name]
    cells, labels, class_names = read_debian_dataset(name, file_name, checks)
    bunch = getattr(sklearn.datasets, loader)()
    names = [str(s) for s in bunch.feature_names]
    # The names come from sklearn's loader, the values from our own parse of the same file: the
    # loader's data must equal the parse, or the names could be attached to the wrong columns.
    # reference: sklearn.datasets.{loader}() (Debian python3-sklearn 1.2.1)
    parsed = np.array([[float(t) for t in r] for r in cells])
    checks.check(f"{name}: own parse equals sklearn.datasets.{loader}().data and .target",
                 parsed.shape == bunch.data.shape and np.array_equal(parsed, bunch.data)
                 and [class_names[k] for k in bunch.target] == labels)
    return Dataset(name, cells, names, labels, "diagnosis" if name == "breast_cancer" else "class")


# ---- writing the files pare reads ------------------------------------------------------------

def text_of(cell, missing_token):
    return missing_token if cell is None else cell


def write_text(path, text):
    if path.endswith(".gz"):
        with gzip.open(path, "wt", newline="") as f:
            f.write(text)
    else:
        with open(path, "w", newline="") as f:
            f.write(text)


def rows_are_samples_text(ds, delim=",", label_position="last", tokens=None):
    """Header `sample,<features>,<label>` (or the label second); one line per sample."""
    lines = []
    names = list(ds.feature_names)
    header = ["sample"] + names
    if ds.labels is not None:
        header = (["sample", ds.label_name] + names if label_position == "second"
                  else header + [ds.label_name])
    lines.append(delim.join(header))
    for i, row in enumerate(ds.cells):
        vals = [text_of(c, tokens[i][j] if tokens else "NA") for j, c in enumerate(row)]
        if ds.labels is None:
            fields = [ds.sample_ids[i]] + vals
        elif label_position == "second":
            fields = [ds.sample_ids[i], ds.labels[i]] + vals
        else:
            fields = [ds.sample_ids[i]] + vals + [ds.labels[i]]
        lines.append(delim.join(fields))
    return "\n".join(lines) + "\n"


def rows_are_features_text(ds, delim=",", label_line=True, tokens=None):
    """Header `feature,<sample ids>`; the label line first (when asked), then one line per
    feature."""
    lines = [delim.join(["feature"] + ds.sample_ids)]
    if label_line and ds.labels is not None:
        lines.append(delim.join([ds.label_name] + ds.labels))
    for j, name in enumerate(ds.feature_names):
        vals = [text_of(ds.cells[i][j], tokens[i][j] if tokens else "NA")
                for i in range(len(ds.cells))]
        lines.append(delim.join([name] + vals))
    return "\n".join(lines) + "\n"


# ---- running pare and reading profile.tsv ----------------------------------------------------

def run_pare(pare, data, out_dir, extra):
    cmd = [pare, "scan", data, "--out", out_dir] + extra
    res = subprocess.run(cmd, capture_output=True, text=True)
    return res, os.path.join(out_dir, "profile.tsv")


def read_profile(path):
    with open(path, newline="") as f:
        rows = list(csv.reader(f, delimiter="\t"))
    header, body = rows[0], rows[1:]
    table = {k: [r[i] for r in body] for i, k in enumerate(header)}
    return header, table


def num(text):
    return math.nan if text == "NA" else float(text)


def rel_err(actual, expected):
    if math.isnan(expected) or math.isnan(actual):
        return 0.0 if math.isnan(expected) and math.isnan(actual) else math.inf
    if expected == actual:
        return 0.0
    return abs(actual - expected) / max(abs(expected), 1e-300)


def compare_column(checks, label, names, actual, expected, rel, floors=None):
    """One check: every feature's `actual` within `rel` (or the absolute floor) of `expected`."""
    worst, bad = 0.0, []
    for j, (a, e) in enumerate(zip(actual, expected)):
        if math.isnan(a) or math.isnan(e):
            ok = math.isnan(a) and math.isnan(e)
            err = 0.0 if ok else math.inf
        elif floors is not None and abs(a - e) <= floors[j]:
            ok, err = True, 0.0  # within the absolute floor (a value that should be 0)
        else:
            err = rel_err(a, e)
            ok = err <= rel
        worst = max(worst, err)
        if not ok:
            bad.append(f"{names[j]}: pare {a!r}, reference {e!r}")
    detail = f"{len(actual)} features, max rel err {worst:.1e}, tol {rel:g}"
    if bad:
        detail += "; " + "; ".join(bad[:4]) + (" ..." if len(bad) > 4 else "")
    checks.check(label, not bad and len(actual) == len(expected), detail)


def expected_flags(n, missing, mean, sd, lo, hi, names):
    """Flags by the rules documented in include/pare/profile.h (FeatureFlag, ProfileOptions
    defaults), evaluated on the numpy statistics."""
    counts = {}
    for nm in names:
        counts[nm] = counts.get(nm, 0) + 1
    out = []
    for j in range(len(names)):
        f = []
        if n[j] == 0:
            f.append("all_missing")
        elif lo[j] == hi[j]:
            f.append("constant")
        elif n[j] >= 2 and sd[j] < NEAR_CONSTANT_CV * abs(mean[j]):
            f.append("near_constant")
        if missing[j] / (n[j] + missing[j]) > MOSTLY_MISSING:
            f.append("mostly_missing")
        if counts[names[j]] > 1:
            f.append("duplicate_name")
        out.append(",".join(f))
    return out


def check_profile(checks, tag, ds, profile_path, x64, x32):
    """Compares profile.tsv with numpy statistics of x32 (1e-9) and x64 (1e-6)."""
    import numpy as np

    if not checks.check(f"{tag}: profile.tsv written", os.path.exists(profile_path)):
        return None
    header, t = read_profile(profile_path)
    want = ["feature", "index", "n", "missing", "missing_rate", "mean", "variance", "sd", "min",
            "max", "flags"]
    checks.check(f"{tag}: profile.tsv columns", header == want, "|".join(header))
    # A repeated name is made unique by the reader (the first keeps it, later ones get #2, #3,
    # ...) and still flagged duplicate_name, so every command names features alike.
    names = unique_names(ds.feature_names)
    p = len(names)
    checks.check(f"{tag}: one line per feature, in input order, index 1-based",
                 t["feature"] == names and t["index"] == [str(j + 1) for j in range(p)],
                 f"{len(t['feature'])} lines for {p} features")
    if t["feature"] != names:
        return None

    with warnings.catch_warnings():
        # All-missing and single-value columns: numpy warns and returns NaN, which is the
        # expected NA.
        warnings.simplefilter("ignore", RuntimeWarning)
        observed = ~np.isnan(x64)
        # reference: numpy.count_nonzero(~numpy.isnan(x)), Debian python3-numpy 1.24.2
        n_ref = observed.sum(axis=0)
        miss_ref = (~observed).sum(axis=0)
        stats = {}
        for kind, x in (("f32", x32), ("f64", x64)):
            stats[kind] = {
                # reference: numpy.nanmean, Debian python3-numpy 1.24.2
                "mean": np.nanmean(x, axis=0),
                # reference: numpy.nanvar(ddof=1), Debian python3-numpy 1.24.2
                "variance": np.nanvar(x, axis=0, ddof=1),
                # reference: numpy.nanstd(ddof=1), Debian python3-numpy 1.24.2
                "sd": np.nanstd(x, axis=0, ddof=1),
                # reference: numpy.nanmin / numpy.nanmax, Debian python3-numpy 1.24.2
                "min": np.nanmin(x, axis=0),
                "max": np.nanmax(x, axis=0),
            }
        scale = np.nanmax(np.abs(x64), axis=0)
    n_ref = [int(v) for v in n_ref]
    miss_ref = [int(v) for v in miss_ref]

    checks.check(f"{tag}: n equals numpy's count of observed values",
                 [int(v) for v in t["n"]] == n_ref)
    checks.check(f"{tag}: missing equals numpy's count of NaN cells",
                 [int(v) for v in t["missing"]] == miss_ref)
    compare_column(checks, f"{tag}: missing_rate = missing / rows", names,
                   [num(v) for v in t["missing_rate"]],
                   [m / (a + m) for a, m in zip(n_ref, miss_ref)], REL_RATE)

    sd_floor = [SD_FLOOR * s if not math.isnan(s) else 0.0 for s in scale]
    var_floor = [f * f for f in sd_floor]
    floors = {"mean": None, "variance": var_floor, "sd": sd_floor, "min": None, "max": None}
    for key in ("mean", "variance", "sd", "min", "max"):
        actual = [num(v) for v in t[key]]
        if key in ("min", "max"):
            # min and max are float32 values printed as the shortest float32 text: round the
            # text to float32 and compare exactly with the float32-rounded input.
            actual32 = [f32_round(v) if v != "NA" else math.nan for v in t[key]]
            compare_column(checks, f"{tag}: {key} equals numpy nan{key} of float32-rounded values",
                           names, actual32, [float(v) for v in stats["f32"][key]], 0.0)
        else:
            compare_column(checks, f"{tag}: {key} vs numpy on float32-rounded values", names,
                           actual, [float(v) for v in stats["f32"][key]], REL_VS_F32,
                           floors[key])
        compare_column(checks, f"{tag}: {key} vs numpy on original float64 values", names, actual,
                       [float(v) for v in stats["f64"][key]], REL_VS_F64, floors[key])

    flags_ref = expected_flags(n_ref, miss_ref, stats["f32"]["mean"], stats["f32"]["sd"],
                               stats["f32"]["min"], stats["f32"]["max"], ds.feature_names)
    wrong = [f"{names[j]}: pare '{t['flags'][j]}', expected '{flags_ref[j]}'"
             for j in range(p) if t["flags"][j] != flags_ref[j]]
    flagged = sorted({f for fl in flags_ref for f in fl.split(",") if f})
    checks.check(f"{tag}: flags as documented in profile.h ({', '.join(flagged) or 'none'})",
                 not wrong, "; ".join(wrong[:4]))
    return t


def check_classes(checks, tag, stdout, label_name, expected_counts, source):
    """The summary's class line names every class with its count."""
    line = next((ln for ln in stdout.splitlines() if ln.strip().startswith("classes")), "")
    ok = f"{label_name}:" in line and all(
        re.search(rf"(^|[ :,]){re.escape(c)} {k:,}([ ,(]|$)", line)
        for c, k in expected_counts.items())
    checks.check(f"{tag}: class counts in the summary ({source})", ok, line.strip())


# ---- the scenarios ---------------------------------------------------------------------------

def add_synthetic_columns(ds):
    """Appends a constant column (2.5, exact in binary), a constant 0.1 column (not exact: the
    float32 rounding must not make it look variable) and a near-constant column whose values are
    exact in float32 (512 + k/16), so every reference comparison stays exact-input."""
    import numpy as np

    rng = np.random.default_rng(20240611)
    n = len(ds.cells)
    ks = rng.integers(0, 8, size=n)
    ks[0], ks[1] = 0, 7  # not constant whatever the draw
    for i in range(n):
        ds.cells[i] = ds.cells[i] + ["2.5", "0.1", repr(512 + int(ks[i]) / 16)]
    ds.feature_names = ds.feature_names + ["constant_2.5", "constant_0.1", "near_constant_512"]


def unique_names(names):
    """pare's rule for repeated feature names: the first occurrence keeps the name, later ones
    become NAME#2, NAME#3, ... (a suffix that would give a name already taken is skipped)."""
    taken = set()
    repeats = []
    for j, name in enumerate(names):
        if name in taken:
            repeats.append(j)
        taken.add(name)
    out = list(names)
    following = {}
    for j in repeats:
        k = following.get(names[j], 2)
        while f"{names[j]}#{k}" in taken:
            k += 1
        out[j] = f"{names[j]}#{k}"
        taken.add(out[j])
        following[names[j]] = k + 1
    return out


def with_missing(ds):
    """A copy with gaps: ~6% of cells at random in every default missing-value token (NA, empty,
    NaN, nan, null, ?), one column > 20% missing, one all missing, one with a single observed
    value, one constant with gaps, and a duplicated feature name."""
    import numpy as np

    rng = np.random.default_rng(7)
    n = len(ds.cells)
    cells = [list(r) for r in ds.cells]
    names = list(ds.feature_names)
    p = len(names)
    token_set = ["NA", "", "NaN", "nan", "null", "?"]
    tokens = [[token_set[int(k)] for k in rng.integers(0, len(token_set), size=p + 4)]
              for _ in range(n)]
    gaps = rng.random((n, p)) < 0.06
    gaps[rng.random(n) < 0.3, 0] = True  # column 0: about 30% missing
    for i in range(n):
        for j in range(p):
            if gaps[i, j]:
                cells[i][j] = None
    single = int(rng.integers(0, n))
    for i in range(n):
        cells[i] += [None,                                  # all missing
                     cells[i][3] if i == single else None,  # one observed value
                     None if i % 5 == 0 else "-3.75",       # constant, gaps just over 20%
                     cells[i][1]]                           # same name as column 1
    names += ["all_missing", "single_value", "constant_gappy", names[1]]
    if cells[single][-3] is None:
        cells[single][-3] = "42.125"
    out = Dataset(ds.name + "+gaps", cells, names, ds.labels, ds.label_name)
    return out, tokens


def tiled(ds, times):
    """The rows repeated `times` times (new sample ids): a file of several 4 MiB read chunks."""
    cells = [list(r) for _ in range(times) for r in ds.cells]
    labels = [lb for _ in range(times) for lb in ds.labels]
    return Dataset(ds.name + f"x{times}", cells, list(ds.feature_names), labels, ds.label_name)


def main():
    if len(sys.argv) != 2:
        print("usage: scan_reference.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    in_ci = os.environ.get("CI", "").lower() == "true"

    missing = [f for f, _ in DATASETS.values() if not os.path.exists(os.path.join(DATA_DIR, f))]
    for module in ("numpy", "sklearn"):
        if importlib.util.find_spec(module) is None:
            missing.append(f"python module {module}")
    if missing:
        checks.skip("scan reference", "missing " + ", ".join(missing) + " (install python3-sklearn)")
        checks.summary()
        return checks.exit_code()
    if not os.access(pare, os.X_OK):
        checks.check("pare binary is executable", False, pare)
        print(f"{checks.passed} passed, {checks.failed} failed")
        return 1

    import numpy as np

    with tempfile.TemporaryDirectory(prefix="pare-scan-ref-") as tmp:
        def path(name):
            return os.path.join(tmp, name)

        # ---- breast cancer: four encodings of the same data, plus a sample sheet ----
        bc = load_dataset("breast_cancer", checks)
        add_synthetic_columns(bc)
        x64, x32 = bc.arrays()
        write_text(path("bc_samples.csv"), rows_are_samples_text(bc))
        write_text(path("bc_samples.csv.gz"), rows_are_samples_text(bc))
        write_text(path("bc_features.csv"), rows_are_features_text(bc))
        write_text(path("bc_features.csv.gz"), rows_are_features_text(bc))
        # TSV without a label line; labels from a sample sheet in another order.
        write_text(path("bc_features.tsv"), rows_are_features_text(bc, "\t", label_line=False))
        order = list(range(len(bc.sample_ids)))[::-1]
        write_text(path("bc_sheet.csv"), "sample_id,batch,diagnosis\n" + "".join(
            f"{bc.sample_ids[i]},b{i % 3},{bc.labels[i]}\n" for i in order))
        # reference: class counts malignant 212, benign 357 from CHECKS.md section 10
        bc_counts = {"malignant": 212, "benign": 357}
        runs = [
            ("bc rows=samples csv", "bc_samples.csv", ["--label", "diagnosis", "--threads", "1"]),
            ("bc rows=samples csv.gz", "bc_samples.csv.gz", ["--label", "diagnosis"]),
            ("bc rows=features csv", "bc_features.csv",
             ["--layout", "rows=features", "--label", "diagnosis", "--threads", "2"]),
            ("bc rows=features csv.gz", "bc_features.csv.gz",
             ["--layout", "rows=features", "--label", "diagnosis"]),
            ("bc rows=features tsv + sheet", "bc_features.tsv",
             ["--layout", "rows=features", "--labels", path("bc_sheet.csv") + ":diagnosis"]),
        ]
        profiles = {}
        for k, (tag, fname, extra) in enumerate(runs):
            res, prof = run_pare(pare, path(fname), path(f"out_bc{k}"), extra)
            checks.check(f"{tag}: pare scan exits 0", res.returncode == 0,
                         res.stderr.strip()[:300])
            if res.returncode != 0:
                continue
            check_profile(checks, tag, bc, prof, x64, x32)
            check_classes(checks, tag, res.stdout, "diagnosis", bc_counts, "CHECKS.md section 10")
            with open(prof, "rb") as f:
                profiles[tag] = f.read()
        # Not an external reference: a differential check. The same values in another layout,
        # compression or thread count must give the same profile byte for byte (STYLE.md:
        # 1 vs N threads must agree; read order must not change the sums).
        first = profiles.get(runs[0][0])
        checks.check("bc: profile.tsv identical across layouts, gzip, TSV and threads 1/2",
                     first is not None and len(profiles) == len(runs)
                     and all(v == first for v in profiles.values()),
                     f"{len(profiles)} profiles")

        # ---- a larger file: several 4 MiB read chunks, threads 1 vs 2 ----
        big = tiled(bc, 40)
        b64, b32 = np.tile(x64, (40, 1)), np.tile(x32, (40, 1))
        write_text(path("big_samples.csv"), rows_are_samples_text(big))
        write_text(path("big_features.csv"), rows_are_features_text(big))
        big_profiles = []
        for layout, fname in (("rows=samples", "big_samples.csv"),
                              ("rows=features", "big_features.csv")):
            size_mib = os.path.getsize(path(fname)) / 2**20
            for threads in ("1", "2"):
                tag = f"bc x40 {layout} ({size_mib:.1f} MiB) threads {threads}"
                res, prof = run_pare(pare, path(fname), path(f"out_big_{layout}_{threads}"),
                                     ["--layout", layout, "--label", "diagnosis",
                                      "--threads", threads])
                checks.check(f"{tag}: pare scan exits 0", res.returncode == 0,
                             res.stderr.strip()[:300])
                if res.returncode != 0:
                    continue
                check_profile(checks, tag, big, prof, b64, b32)
                check_classes(checks, tag, res.stdout, "diagnosis",
                              {c: 40 * k for c, k in bc_counts.items()},
                              "40 x CHECKS.md section 10")
                with open(prof, "rb") as f:
                    big_profiles.append(f.read())
        # Differential check, as above.
        checks.check("bc x40: profile.tsv identical across layouts and threads 1/2",
                     len(big_profiles) == 4 and len(set(big_profiles)) == 1)

        # ---- breast cancer with gaps in every missing-value token ----
        gappy, tokens = with_missing(bc)
        g64, g32 = gappy.arrays()
        write_text(path("gaps_samples.csv"), rows_are_samples_text(gappy, tokens=tokens))
        write_text(path("gaps_features.csv.gz"),
                   rows_are_features_text(gappy, tokens=tokens))
        for tag, fname, extra in (
                ("bc+gaps rows=samples", "gaps_samples.csv", ["--label", "diagnosis"]),
                ("bc+gaps rows=features gz", "gaps_features.csv.gz",
                 ["--layout", "rows=features", "--label", "diagnosis", "--threads", "2"])):
            res, prof = run_pare(pare, path(fname), path("out_" + fname), extra)
            checks.check(f"{tag}: pare scan exits 0", res.returncode == 0,
                         res.stderr.strip()[:300])
            if res.returncode == 0:
                check_profile(checks, tag, gappy, prof, g64, g32)

        # ---- wine (label column second) and iris ----
        for name, position in (("wine", "second"), ("iris", "last")):
            ds = load_dataset(name, checks)
            d64, d32 = ds.arrays()
            fname = f"{name}.csv"
            write_text(path(fname), rows_are_samples_text(ds, label_position=position))
            counts = {c: ds.labels.count(c) for c in sorted(set(ds.labels))}
            for layout, f2, extra in (
                    ("rows=samples", fname, ["--label", ds.label_name]),
                    ("rows=features", f"{name}_features.csv",
                     ["--layout", "rows=features", "--label", ds.label_name])):
                if layout == "rows=features":
                    write_text(path(f2), rows_are_features_text(ds))
                tag = f"{name} {layout}"
                res, prof = run_pare(pare, path(f2), path(f"out_{name}_{layout}"), extra)
                checks.check(f"{tag}: pare scan exits 0", res.returncode == 0,
                             res.stderr.strip()[:300])
                if res.returncode != 0:
                    continue
                check_profile(checks, tag, ds, prof, d64, d32)
                # reference: label counts of the Debian file (collections count of its last column)
                check_classes(checks, tag, res.stdout, ds.label_name, counts, "counted in the file")

    checks.summary()
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
