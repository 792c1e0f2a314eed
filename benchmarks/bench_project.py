#!/usr/bin/python3
"""Truncated PCA of a wide matrix: `pare project` next to the same job with Debian's Python stack.
Not run by CI (it takes minutes and ~10 GB of memory at the default size).

    /usr/bin/python3 benchmarks/bench_project.py [--pare PATH] [--dir DIR] [--samples 2000]
        [--features 100000] [--components 50] [--seed 1] [--regen]

1. Generates (once; reused while the file exists, --regen rewrites it) a samples x features CSV,
   rows=samples, with a realistic decaying spectrum: 300 latent components with singular values
   proportional to (i + 1)^-0.8 carrying about 60% of the variance, Gaussian noise for the rest,
   features scaled by factors in [0.5, 3] and shifted by means in [0, 20], values written with 3
   decimals (a measured quantity). Deterministic for --seed.
2. (a) `pare project FILE --components K --out DIR` under /usr/bin/time -v: wall time, CPU time,
   peak RSS, and pare's own step table (read, project seconds).
   (b) The Python equivalent in a child process, also under /usr/bin/time -v: the faster of
   pandas.read_csv and numpy.loadtxt (chosen beforehand, untimed, from both timed on the first 50
   and 150 rows and extrapolated linearly to the whole file), then
   sklearn.decomposition.PCA(n_components=K, svd_solver='randomized', random_state=0)
   .fit_transform, then the same three output files (scores.csv, loadings.tsv, explained.tsv)
   written with pandas/numpy; wall and CPU time, peak RSS, and the seconds of each part.
3. Accuracy of both against an exact reference: numpy.linalg.eigh of the n x n Gram matrix of the
   centred data in float64 (the eigenvalues / (n - 1) are the PCA eigenvalues; the loadings are
   Xc^T u / sqrt(lambda)): max relative error of the first K eigenvalues and the largest principal
   angle between the K-dimensional loading subspaces (scipy.linalg.subspace_angles).
Prints the BLAS numpy uses (threadpoolctl, else numpy.show_config), the load average before and
after (wall times mean little on a busy machine), a side-by-side table and the ratios.
"""

import argparse
import json
import math
import os
import re
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_common import load_average, time_report  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))


# ---- data ------------------------------------------------------------------------------------

def generate(n, p, seed):
    """The benchmark matrix in float64, rounded to 3 decimals (what the CSV holds)."""
    rng = np.random.default_rng(seed)
    r = 300
    u, _ = np.linalg.qr(rng.standard_normal((n, r)))
    v, _ = np.linalg.qr(rng.standard_normal((p, r)))
    s = (1.0 + np.arange(r)) ** -0.8
    # signal: ~60% of the total sum of squares; noise variance per cell for the other ~40%
    signal_ss = float(np.sum(s ** 2))
    noise_sd = math.sqrt(signal_ss * (0.4 / 0.6) / (n * p))
    x = (u * s) @ v.T
    x += noise_sd * rng.standard_normal((n, p))
    x /= noise_sd  # noise sd 1 before the per-feature scale
    x *= rng.uniform(0.5, 3.0, p)
    x += rng.uniform(0.0, 20.0, p)
    return np.round(x, 3)


def write_csv(path, x):
    n, p = x.shape
    fmt = ",".join(["%.3f"] * p)
    tmp = path + ".part"
    with open(tmp, "w") as f:
        f.write("sample," + ",".join(f"g{j + 1:06d}" for j in range(p)) + "\n")
        for i in range(n):
            f.write(f"s{i + 1:05d}," + fmt % tuple(x[i].tolist()) + "\n")
    os.replace(tmp, path)


# ---- measuring ---------------------------------------------------------------------------------

def timed(cmd):
    """Runs cmd under /usr/bin/time -v; returns (result, wall s, cpu s, peak RSS bytes)."""
    res = subprocess.run(["/usr/bin/time", "-v"] + cmd, capture_output=True, text=True)
    wall, cpu, rss = time_report(res.stderr)
    return res, wall, cpu, rss


def blas_info():
    try:
        import threadpoolctl

        lines = []
        for lib in threadpoolctl.threadpool_info():
            lines.append(f"{lib.get('internal_api')} {lib.get('version')} ({lib.get('user_api')}, "
                         f"{lib.get('num_threads')} threads, {lib.get('threading_layer', '')}) "
                         f"{lib.get('filepath')}")
        return "\n".join("  " + s for s in lines)
    except ImportError:
        import contextlib
        import io

        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            np.show_config()
        return buf.getvalue()


# ---- the Python side (run in a child process so its peak RSS is its own) -------------------

def choose_reader(path, out_dir):
    """The faster of pandas.read_csv and numpy.loadtxt on this file: both timed on the first 50
    and 150 rows and extrapolated linearly to the whole file (a fixed per-column cost would
    otherwise dominate a small trial). Run in its own process, outside the timed run."""
    import pandas as pd

    with open(path) as f:
        header = f.readline()
        n_rows = sum(1 for _ in f)
    with open(path) as f:
        head = [next(f) for _ in range(151)]
    p = len(header.split(",")) - 1

    def trial(rows):
        name = os.path.join(out_dir, f"trial{rows}.csv")
        with open(name, "w") as f:
            f.writelines(head[:rows + 1])
        t = time.perf_counter()
        pd.read_csv(name, index_col=0)
        t_pandas = time.perf_counter() - t
        t = time.perf_counter()
        np.loadtxt(name, delimiter=",", skiprows=1, usecols=range(1, p + 1))
        t_loadtxt = time.perf_counter() - t
        os.remove(name)
        return t_pandas, t_loadtxt

    (p50, l50), (p150, l150) = trial(50), trial(150)
    est_pandas = p50 + (p150 - p50) * (n_rows - 50) / 100
    est_loadtxt = l50 + (l150 - l50) * (n_rows - 50) / 100
    reader = "pandas.read_csv" if est_pandas <= est_loadtxt else "numpy.loadtxt"
    print(json.dumps({"reader": reader, "est_pandas_s": est_pandas, "est_loadtxt_s": est_loadtxt}))


def python_side(path, k, out_dir, reader):
    import pandas as pd
    from sklearn.decomposition import PCA

    t = time.perf_counter()
    if reader == "pandas.read_csv":
        df = pd.read_csv(path, index_col=0)
        ids, names, x = list(df.index), list(df.columns), df.to_numpy()
        del df
    else:
        with open(path) as f:
            names = f.readline().rstrip("\n").split(",")[1:]
        ids = list(np.loadtxt(path, delimiter=",", skiprows=1, usecols=[0], dtype=str))
        x = np.loadtxt(path, delimiter=",", skiprows=1, usecols=range(1, len(names) + 1))
    read_s = time.perf_counter() - t

    t = time.perf_counter()
    pca = PCA(n_components=k, svd_solver="randomized", random_state=0)
    scores = pca.fit_transform(x)
    fit_s = time.perf_counter() - t

    t = time.perf_counter()
    cols = [f"PC{c + 1}" for c in range(k)]
    pd.DataFrame(scores, index=pd.Index(ids, name="sample"), columns=cols).to_csv(
        os.path.join(out_dir, "scores.csv"))
    pd.DataFrame(pca.components_.T, index=pd.Index(names, name="feature"), columns=cols).to_csv(
        os.path.join(out_dir, "loadings.tsv"), sep="\t")
    ev = pca.explained_variance_
    pd.DataFrame({"component": cols, "eigenvalue": ev, "ratio": pca.explained_variance_ratio_,
                  "cumulative_ratio": np.cumsum(pca.explained_variance_ratio_),
                  "singular_value": pca.singular_values_}).to_csv(
        os.path.join(out_dir, "explained.tsv"), sep="\t", index=False)
    write_s = time.perf_counter() - t
    np.savez(os.path.join(out_dir, "sklearn.npz"), eigenvalues=ev, components=pca.components_.T)
    print(json.dumps({"reader": reader, "read_s": read_s, "fit_s": fit_s, "write_s": write_s,
                      "dtype": str(x.dtype)}))


# ---- driver ------------------------------------------------------------------------------------

def pare_steps(stdout):
    """Seconds of each step from pare's printed step table (`   read  100,000  100,000  12.34`)."""
    steps = {}
    for line in stdout.splitlines():
        m = re.match(r"\s+(\w+)\s+[\d,]+\s+[\d,]+\s+([\d.]+)\s*$", line)
        if m:
            steps[m.group(1)] = float(m.group(2))
    return steps


def read_loadings(path, k):
    import pandas as pd

    return pd.read_csv(path, sep="\t", index_col=0).to_numpy()[:, :k]


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    default_pare = next((c for c in [os.path.join(HERE, "..", d, "pare") for d in ("build-bench", "build")]
                         if os.path.exists(c)), os.path.join(HERE, "..", "build", "pare"))
    ap.add_argument("--pare", default=default_pare)
    ap.add_argument("--dir", default="/tmp/pare-bench-project")
    ap.add_argument("--samples", type=int, default=2000)
    ap.add_argument("--features", type=int, default=100000)
    ap.add_argument("--components", type=int, default=50)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--regen", action="store_true")
    ap.add_argument("--python-side", nargs=3, metavar=("FILE", "OUT", "READER"), help=argparse.SUPPRESS)
    ap.add_argument("--python-trial", nargs=2, metavar=("FILE", "OUT"), help=argparse.SUPPRESS)
    a = ap.parse_args()
    k = a.components
    if a.python_side:
        python_side(a.python_side[0], k, a.python_side[1], a.python_side[2])
        return 0
    if a.python_trial:
        choose_reader(*a.python_trial)
        return 0
    if not os.path.exists("/usr/bin/time"):
        print("bench_project.py: needs /usr/bin/time (apt-get install -y time)", file=sys.stderr)
        return 2
    pare = os.path.abspath(a.pare)
    n, p = a.samples, a.features
    os.makedirs(a.dir, exist_ok=True)
    path = os.path.join(a.dir, f"wide-{n}x{p}-seed{a.seed}.csv")

    print(f"pare: {pare}")
    print(f"numpy {np.__version__}; BLAS (threadpoolctl):\n{blas_info()}")
    print(f"cores: {os.cpu_count()}; load average before: {load_average()}")
    sys.stdout.flush()
    if a.regen or not os.path.exists(path):
        t = time.perf_counter()
        write_csv(path, generate(n, p, a.seed))
        print(f"generated {path} in {time.perf_counter() - t:.0f} s")
    size = os.path.getsize(path)
    float32_bytes = n * p * 4
    print(f"data: {n:,} x {p:,}, CSV {size / 1e9:.2f} GB, as float32 {float32_bytes / 1e9:.2f} GB "
          f"({float32_bytes / 2**20:,.0f} MiB)")
    # warm the page cache so neither side pays for the first read from disk
    with open(path, "rb") as f:
        while f.read(1 << 24):
            pass
    sys.stdout.flush()

    with tempfile.TemporaryDirectory(prefix="pare-bench-project-", dir=a.dir) as tmp:
        # (a) pare
        pare_out = os.path.join(tmp, "pare")
        res, pare_wall, pare_cpu, pare_rss = timed([pare, "project", path, "--components", str(k),
                                                     "--out", pare_out])
        if res.returncode != 0:
            print(res.stdout, res.stderr, file=sys.stderr)
            return 1
        print(res.stdout.rstrip())
        steps = pare_steps(res.stdout)
        with open(os.path.join(pare_out, "plan.json")) as f:
            pr = json.load(f)["projection"]
        sys.stdout.flush()

        # (b) Python
        py_out = os.path.join(tmp, "python")
        os.makedirs(py_out)
        res = subprocess.run([sys.executable, os.path.abspath(__file__), "--python-trial", path, py_out],
                             capture_output=True, text=True)
        if res.returncode != 0:
            print(res.stdout, res.stderr, file=sys.stderr)
            return 1
        trial = json.loads(res.stdout.strip().splitlines()[-1])
        res, py_wall, py_cpu, py_rss = timed([sys.executable, os.path.abspath(__file__), "--components", str(k),
                                              "--python-side", path, py_out, trial["reader"]])
        if res.returncode != 0:
            print(res.stdout, res.stderr, file=sys.stderr)
            return 1
        py = json.loads(res.stdout.strip().splitlines()[-1])
        print(f"python: reader {py['reader']} (estimated from 50 and 150 rows, untimed: pandas.read_csv "
              f"{trial['est_pandas_s']:.1f} s, numpy.loadtxt {trial['est_loadtxt_s']:.1f} s), matrix {py['dtype']}; "
              f"read {py['read_s']:.1f} s, PCA fit {py['fit_s']:.1f} s, write {py['write_s']:.1f} s")
        print(f"load average after the timed runs: {load_average()}")
        sys.stdout.flush()

        # (c) accuracy against the exact reference
        t = time.perf_counter()
        x = generate(n, p, a.seed).astype(np.float32).astype(np.float64)  # the values pare holds
        x -= x.mean(axis=0)
        gram = x @ x.T
        lam_all, u = np.linalg.eigh(gram)
        lam_all = lam_all[::-1]
        lam, u = lam_all[:k], u[:, ::-1][:, :k]
        exact_eig = lam / (n - 1)
        exact_v = (x.T @ u) / np.sqrt(lam)
        ref_s = time.perf_counter() - t
        del x, gram
        import pandas as pd
        import scipy.linalg

        pare_eig = pd.read_csv(os.path.join(pare_out, "explained.tsv"), sep="\t")["eigenvalue"].to_numpy()
        pare_v = read_loadings(os.path.join(pare_out, "loadings.tsv"), k)
        skl = np.load(os.path.join(py_out, "sklearn.npz"))
        acc = {}
        for name, eig, v in [("pare", pare_eig, pare_v), ("sklearn", skl["eigenvalues"], skl["components"])]:
            acc[name] = (float(np.max(np.abs(eig - exact_eig) / exact_eig)),
                         float(np.max(scipy.linalg.subspace_angles(v, exact_v))))
        print(f"exact reference (numpy.linalg.eigh of the {n} x {n} Gram matrix, float64): {ref_s:.0f} s; "
              f"its eigenvalues {exact_eig[0]:.4g} .. {exact_eig[-1]:.4g}, "
              f"gap lambda_{k} / lambda_{k + 1} = {lam_all[k - 1] / lam_all[k]:.4f}")

    pare_pca, py_fit = steps.get("project", math.nan), py["fit_s"]
    rows = [
        ("end to end wall (s)", f"{pare_wall:.1f}", f"{py_wall:.1f}", f"{py_wall / pare_wall:.1f}x"),
        ("end to end CPU (s)", f"{pare_cpu:.1f}", f"{py_cpu:.1f}", f"{py_cpu / pare_cpu:.1f}x"),
        ("read (s)", f"{steps.get('read', math.nan):.1f}", f"{py['read_s']:.1f}",
         f"{py['read_s'] / steps.get('read', math.nan):.1f}x"),
        ("PCA only (s)", f"{pare_pca:.1f}", f"{py_fit:.1f}", f"{py_fit / pare_pca:.1f}x"),
        ("peak RSS (GiB)", f"{pare_rss / 2**30:.2f}", f"{py_rss / 2**30:.2f}", f"{py_rss / pare_rss:.1f}x"),
        (f"max rel error, {k} eigenvalues", f"{acc['pare'][0]:.1e}", f"{acc['sklearn'][0]:.1e}", ""),
        ("largest principal angle (rad)", f"{acc['pare'][1]:.1e}", f"{acc['sklearn'][1]:.1e}", ""),
    ]
    print()
    print(f"{n:,} x {p:,}, K = {k}; pare: {pr['method']}, {pr['precision']} products, {pr['iterations']} blocks, "
          f"residual {pr['residual']:.2g}; python: {py['reader']} + sklearn PCA(svd_solver='randomized', "
          f"random_state=0)")
    widths = [max(len(r[i]) for r in rows + [("", "pare", "python", "python / pare")]) for i in range(4)]
    for r in [("", "pare", "python", "python / pare")] + rows:
        print("  " + r[0].ljust(widths[0]) + "  " + "  ".join(r[i].rjust(widths[i]) for i in range(1, 4)))
    print(f"  pare peak RSS / float32 matrix size: {pare_rss / float32_bytes:.2f} "
          f"({pare_rss / 2**30:.2f} GiB vs {float32_bytes / 2**30:.2f} GiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
