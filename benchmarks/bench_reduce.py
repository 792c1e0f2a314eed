#!/usr/bin/python3
"""`pare reduce` side by side with the same pipeline written with Debian's Python stack
(benchmarks/reference_pipeline.py: numpy on OpenBLAS, pandas, scipy, scikit-learn). Not run by CI.

    /usr/bin/python3 benchmarks/bench_reduce.py [--size 1000x50000] [--pare PATH] \
        [--dir /tmp/pare-bench-data] [--seed 1] [--components 50] [--keep 5000] [--repeat 1] [--regen]
    make bench SIZE=2000x100000

1. Generates (once; reused while the file exists, --regen rewrites it) SAMPLES x FEATURES of the
   planted scenario of make_wide_csv.py (class signal, gaps, near-constant columns, correlated
   blocks above and below |r| = 0.9), rows=samples with a `group` label column, into --dir.
2. Reads the file once to warm the page cache, then runs, one after the other (never at the same
   time), each under /usr/bin/time -v:
     pare reduce FILE --label group --components K [--max-corr 0.9 --keep Q] --out DIR/pare-W
     /usr/bin/python3 reference_pipeline.py FILE --label group --components K [...] --out DIR/python-W
   for two workloads W: every survivor pruned ("all"), and the everyday one, pruning stopped at
   --keep Q kept features (default 5000; --keep 0 runs only the first).
   --repeat N runs each pair N times and keeps each side's fastest run (wall clock).
3. Prints a Markdown table: seconds per step and end to end for pare and Python, the ratio
   Python / pare, CPU seconds, peak RSS of both (/usr/bin/time's maximum resident set size), the
   BLAS numpy uses, the load average before and after (wall times mean little on a busy machine).
   pare's steps come from its plan.json, Python's from the run.json the reference writes.
   Rows: transform (off) is folded into variance, pare's `top` (kept-feature centre and sd) into
   pruning, and gap filling is in pruning on both sides (pare fills after scoring, in that step).
   PCA includes writing scores.csv, loadings.tsv and explained.tsv on both sides. "write + other"
   is the end-to-end wall time minus the steps: the other output files, start-up (Python's
   imports) and exit.
4. Checks that both keep the same features in the same order (pare's ranking.tsv against the
   reference's kept-features.txt) and that every dropped feature was dropped by the same step
   (selection-log.tsv); prints the first differences, with each feature's MI on both sides, and
   exits 1 if there are any. Also checks both sides' PCA eigenvalues against exact ones
   (numpy.linalg.eigvalsh of the n x n Gram matrix of the kept features in float64; untimed,
   after both runs; --no-pca-check skips it).

Needs /usr/bin/time (Debian package `time`). Exit codes: 0 agree, 1 they differ or a run failed,
2 something needed is missing.
"""

import argparse
import json
import math
import os
import re
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_common import load_average, time_report  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
PY = "/usr/bin/python3"

# Rows of the table: (label, pare steps summed, reference steps summed)
ROWS = [
    ("read", ["read"], ["read"]),
    ("missing filter", ["missing"], ["missing"]),
    ("impute (learn means)", ["impute"], ["impute"]),
    ("variance filter", ["transform", "variance"], ["variance"]),
    ("scoring + ranking", ["relevance"], ["scoring"]),
    ("fill + correlation pruning", ["redundancy", "top"], ["pruning"]),
    ("PCA (+ its 3 files)", ["project"], ["pca_fit", "pca_write"]),
]


def timed(cmd, log_path):
    """Runs cmd under /usr/bin/time -v; returns (returncode, wall s, cpu s, peak RSS bytes)."""
    time_path = log_path + ".time"
    with open(log_path, "w") as log:
        rc = subprocess.run(["/usr/bin/time", "-v", "-o", time_path] + cmd, stdout=log,
                            stderr=subprocess.STDOUT).returncode
    with open(time_path) as f:
        wall, cpu, rss = time_report(f.read())
    return rc, wall, cpu, rss


def read_tsv(path):
    """A TSV as a list of dicts, numbers left as text (parsed exactly where needed)."""
    with open(path, newline="") as f:
        head = f.readline().rstrip("\r\n").split("\t")
        return [dict(zip(head, line.rstrip("\r\n").split("\t"))) for line in f]


def compare(pare_dir, py_dir, show=10):
    """Kept features and order, and dropping steps; returns (ok, lines to print)."""
    out = []
    pare_rank = read_tsv(os.path.join(pare_dir, "ranking.tsv"))
    py_rank = read_tsv(os.path.join(py_dir, "ranking.tsv"))
    with open(os.path.join(py_dir, "kept-features.txt")) as f:
        py_kept = [s.rstrip("\n") for s in f if s.strip()]
    pare_kept = [r["feature"] for r in pare_rank]
    ok = True
    if pare_kept == py_kept:
        out.append(f"PASS kept features: the same {len(pare_kept):,} features in the same order")
    else:
        ok = False
        ps, ys = set(pare_kept), set(py_kept)
        out.append(f"FAIL kept features differ: pare keeps {len(pare_kept):,}, Python "
                   f"{len(py_kept):,}; {len(ps - ys)} only in pare, {len(ys - ps)} only in Python; "
                   f"{sum(a != b for a, b in zip(pare_kept, py_kept)):,} positions differ")
        pare_mi = {r["feature"]: r["mi"] for r in pare_rank}
        py_mi = {r["feature"]: r["mi"] for r in py_rank}
        pare_index = {r["feature"]: r["index"] for r in pare_rank}
        shown = 0
        for i, (a, b) in enumerate(zip(pare_kept, py_kept)):
            if a == b:
                continue
            note = ""
            if a in py_mi and b in py_mi and float(py_mi[a]) == float(py_mi[b]):
                note = (f"  <- equal MI in the reference (a tie; input order puts "
                        f"{min((a, b), key=lambda s: int(pare_index.get(s, 0) or 0))} first), "
                        f"pare's MIs differ by {float(pare_mi.get(a, 'nan')) - float(pare_mi.get(b, 'nan')):.3g}")
            out.append(f"  rank {i + 1}: pare {a} (mi {pare_mi.get(a, '?')}, python {py_mi.get(a, '?')})"
                       f" | python {b} (mi {py_mi.get(b, '?')}, pare {pare_mi.get(b, '?')}){note}")
            shown += 1
            if shown >= show:
                break
        differing = [(a, b) for a, b in zip(pare_kept, py_kept) if a != b]
        ties = sum(1 for a, b in differing
                   if a in py_mi and b in py_mi and float(py_mi[a]) == float(py_mi[b]))
        out.append(f"  {ties:,} of the {len(differing):,} differing positions hold features whose MI is "
                   f"equal in exact arithmetic (the reference finds them from the tables: same "
                   f"multisets of cells, bin totals and class totals): ties the two sides break "
                   f"differently (the definition: input order)")
        for name in sorted(ps - ys)[:show]:
            out.append(f"  only pare keeps {name}")
        for name in sorted(ys - ps)[:show]:
            out.append(f"  only Python keeps {name}")

    pare_log = read_tsv(os.path.join(pare_dir, "selection-log.tsv"))
    py_log = read_tsv(os.path.join(py_dir, "selection-log.tsv"))
    differ = [(p["feature"], p["step"], y["step"]) for p, y in zip(pare_log, py_log)
              if p["feature"] != y["feature"] or p["step"] != y["step"]]
    if len(pare_log) != len(py_log):
        ok = False
        out.append(f"FAIL selection logs have {len(pare_log)} and {len(py_log)} lines")
    elif differ:
        ok = False
        out.append(f"FAIL {len(differ)} features decided by different steps, e.g. " +
                   "; ".join(f"{f}: pare {a}, Python {b}" for f, a, b in differ[:show]))
    else:
        steps = {}
        for r in pare_log:
            steps[r["step"]] = steps.get(r["step"], 0) + 1
        out.append("PASS every input feature decided by the same step (" +
                   ", ".join(f"{k} {v:,}" for k, v in sorted(steps.items())) + ")")
    return ok, out


def eigenvalues_of(out_dir):
    return [float(r["eigenvalue"]) for r in read_tsv(os.path.join(out_dir, "explained.tsv"))]


def exact_eigenvalues(reduced_csv, label, k):
    """The first k PCA eigenvalues of the kept features, exactly: numpy.linalg.eigvalsh of the
    n x n Gram matrix of the centred matrix in float64, divided by n - 1. Reads the reduced.csv of
    the Python run (its values are the float32 values both sides analysed)."""
    import numpy as np
    import pandas as pd

    with open(reduced_csv) as f:
        header = f.readline().rstrip("\r\n").split(",")
    dtypes = dict.fromkeys(header[1:], np.float32)
    df = pd.read_csv(reduced_csv, index_col=0, dtype=dtypes, low_memory=False)
    x = df.to_numpy(dtype=np.float32)  # ids and numbers only
    del df
    n = x.shape[0]
    gram = np.zeros((n, n))
    for start in range(0, x.shape[1], 4096):
        block = x[:, start:start + 4096].astype(np.float64)
        block -= block.mean(axis=0)
        gram += block @ block.T
    return np.linalg.eigvalsh(gram)[::-1][:k] / (n - 1)


def run_workload(a, pare, data, runs, n, p, name, options):
    """One workload: pare and the reference side by side (--repeat times), the table, the checks.
    Returns (exit code, Python / pare end-to-end ratio)."""
    pare_dir, py_dir = os.path.join(runs, f"pare-{name}"), os.path.join(runs, f"python-{name}")
    k = str(a.components)
    load_before = load_average()
    best = {}
    for r in range(a.repeat):
        for side, cmd, out_dir in [
                ("pare", [pare, "reduce", data, "--label", "group", "--components", k, *options, "--out", pare_dir],
                 pare_dir),
                ("python", [PY, os.path.join(HERE, "reference_pipeline.py"), data, "--label", "group",
                            "--components", k, *options, "--out", py_dir], py_dir)]:
            log = os.path.join(runs, f"{side}-{name}.log")
            print(f"run {r + 1}/{a.repeat}: {side} ... (load average {load_average()})", flush=True)
            rc, wall, cpu, rss = timed(cmd, log)
            if rc != 0:
                with open(log) as f:
                    sys.stderr.write(f.read()[-4000:])
                print(f"bench_reduce.py: {side} failed (exit {rc}); log: {log}", file=sys.stderr)
                return 1, None
            if side == "pare":
                with open(os.path.join(out_dir, "plan.json")) as f:
                    steps = {s["step"]: s["seconds"] for s in json.load(f)["steps"]}
                extra = {}
            else:
                with open(os.path.join(out_dir, "run.json")) as f:
                    extra = json.load(f)
                steps = extra["seconds"]
            print(f"  wall {wall:.1f} s, cpu {cpu:.1f} s, peak RSS {rss / 2**30:.2f} GiB", flush=True)
            if side not in best or wall < best[side]["wall"]:
                best[side] = {"wall": wall, "cpu": cpu, "rss": rss, "steps": steps, "extra": extra}
    load_after = load_average()

    pare_b, py_b = best["pare"], best["python"]
    blas = py_b["extra"].get("blas", "?")
    versions = py_b["extra"].get("versions", {})
    print()
    print(f"### {n:,} x {p:,}, `pare reduce DATA --label group --components {k}{''.join(' ' + e for e in options)}`")
    print()
    print(f"Python: numpy {versions.get('numpy')}, pandas {versions.get('pandas')}, scipy "
          f"{versions.get('scipy')}, scikit-learn {versions.get('sklearn')}; BLAS: {blas}")
    print(f"Load average before {load_before}, after {load_after}; "
          f"{'fastest of ' + str(a.repeat) + ' runs each' if a.repeat > 1 else 'one run each'}.")
    print()
    print("| step | pare s | Python s | Python / pare |")
    print("| --- | ---: | ---: | ---: |")

    def ratio(x, y):
        return f"{y / x:.1f}" if x > 0 and y == y else "–"

    sum_pare = sum_py = 0.0
    for label, ps, ys in ROWS:
        tp = sum(pare_b["steps"].get(s, 0.0) for s in ps)
        ty = sum(py_b["steps"].get(s, 0.0) for s in ys)
        sum_pare += tp
        sum_py += ty
        print(f"| {label} | {tp:.2f} | {ty:.2f} | {ratio(tp, ty) if tp >= 0.05 else '–'} |")
    op, oy = pare_b["wall"] - sum_pare, py_b["wall"] - sum_py
    print(f"| write + other | {op:.2f} | {oy:.2f} | {ratio(op, oy)} |")
    print(f"| **end to end (wall)** | **{pare_b['wall']:.1f}** | **{py_b['wall']:.1f}** | "
          f"**{ratio(pare_b['wall'], py_b['wall'])}** |")
    print(f"| CPU (user + sys) | {pare_b['cpu']:.1f} | {py_b['cpu']:.1f} | "
          f"{ratio(pare_b['cpu'], py_b['cpu'])} |")
    print(f"| peak RSS GiB | {pare_b['rss'] / 2**30:.2f} | {py_b['rss'] / 2**30:.2f} | "
          f"{ratio(pare_b['rss'], py_b['rss'])} |")
    print()
    py_seconds = py_b["steps"]
    print(f"Python's own split: imports {py_seconds.get('imports', 0):.2f} s, PCA fit "
          f"{py_seconds.get('pca_fit', 0):.2f} s + its files {py_seconds.get('pca_write', 0):.2f} s, "
          f"other files {py_seconds.get('write', 0):.2f} s. pare: redundancy "
          f"{pare_b['steps'].get('redundancy', 0):.2f} s, top {pare_b['steps'].get('top', 0):.2f} s.")
    counts = py_b["extra"].get("counts", {})
    if counts:
        print(f"Features: {counts.get('input'):,} in, {counts.get('missing'):,} after the missing "
              f"filter, {counts.get('variance'):,} after the variance filter, "
              f"{counts.get('kept'):,} kept after pruning.")
    with open(os.path.join(pare_dir, "plan.json")) as f:
        proj = json.load(f).get("projection", {})
    print(f"PCA: pare {proj.get('method')} ({proj.get('precision')} products, {proj.get('iterations')} "
          f"blocks, residual {proj.get('residual', math.nan):.2g}); Python "
          f"sklearn PCA(svd_solver='randomized') on float32.")
    if a.pca_check:
        t = time.perf_counter()
        exact = exact_eigenvalues(os.path.join(py_dir, "reduced.csv"), "group", a.components)
        errors = []
        for out_dir in (pare_dir, py_dir):
            got = eigenvalues_of(out_dir)
            errors.append(max(abs(g - e) / e for g, e in zip(got, exact)))
        print(f"  largest relative error of the {a.components} eigenvalues against numpy.linalg.eigvalsh "
              f"of the n x n Gram matrix in float64 ({time.perf_counter() - t:.0f} s, untimed): "
              f"pare {errors[0]:.1e}, Python {errors[1]:.1e}")
    print()
    ok, lines = compare(pare_dir, py_dir)
    for line in lines:
        print(line)
    print()
    return (0 if ok else 1), py_b["wall"] / pare_b["wall"]


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    default_pare = next((c for c in [os.path.join(HERE, "..", d, "pare")
                                     for d in ("build-bench", "build/release")]
                         if os.path.exists(c)), os.path.join(HERE, "..", "build-bench", "pare"))
    ap.add_argument("--size", default=os.environ.get("SIZE", "1000x50000"),
                    help="SAMPLESxFEATURES (default 1000x50000, or $SIZE)")
    ap.add_argument("--pare", default=default_pare)
    ap.add_argument("--dir", default="/tmp/pare-bench-data")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--components", type=int, default=50)
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--regen", action="store_true")
    ap.add_argument("--keep", type=int, default=5000,
                    help="also run the everyday workload --max-corr 0.9 --keep K (0: only every survivor)")
    ap.add_argument("--no-pca-check", dest="pca_check", action="store_false",
                    help="skip the exact eigenvalues (reads reduced.csv back; untimed)")
    a = ap.parse_args()
    m = re.fullmatch(r"(\d+)x(\d+)", a.size)
    if not m:
        print(f"bench_reduce.py: --size {a.size!r} is not SAMPLESxFEATURES (e.g. 1000x50000)",
              file=sys.stderr)
        return 2
    n, p = int(m.group(1)), int(m.group(2))
    if not os.path.exists("/usr/bin/time"):
        print("bench_reduce.py: needs /usr/bin/time (apt-get install -y time)", file=sys.stderr)
        return 2
    pare = os.path.abspath(a.pare)
    if not os.access(pare, os.X_OK):
        print(f"bench_reduce.py: no pare binary at {pare}", file=sys.stderr)
        return 2
    os.makedirs(a.dir, exist_ok=True)
    base = os.path.join(a.dir, f"planted-{n}x{p}-seed{a.seed}")
    data = base + ".csv"
    if a.regen or not os.path.exists(data):
        t = time.perf_counter()
        # Written under a temporary name: an interrupted run never leaves a truncated file that a
        # later run would reuse.
        rc = subprocess.run([PY, os.path.join(HERE, "make_wide_csv.py"), "--scenario", "planted",
                             "--samples", str(n), "--features", str(p), "--seed", str(a.seed),
                             "--out", data + ".part", "--truth", base + "-truth.tsv"]).returncode
        if rc != 0:
            return 1
        os.replace(data + ".part", data)
        print(f"generated {data} in {time.perf_counter() - t:.0f} s")
    size = os.path.getsize(data)
    version = subprocess.run([pare, "--version"], capture_output=True, text=True).stdout.strip()
    print(f"data: {data}: {n:,} samples x {p:,} features, planted scenario (seed {a.seed}), "
          f"{size / 1e6:,.0f} MB of CSV; float32 matrix {n * p * 4 / 1e6:,.0f} MB")
    print(f"pare: {pare} ({version}); cores: {os.cpu_count()}")
    with open(data, "rb") as f:  # warm the page cache so neither side reads from disk
        while f.read(1 << 24):
            pass

    runs = os.path.join(a.dir, "runs", f"{n}x{p}")
    os.makedirs(runs, exist_ok=True)
    workloads = [("all", [])]
    if a.keep > 0:
        workloads.append((f"keep{a.keep}", ["--max-corr", "0.9", "--keep", str(a.keep)]))
    code, ratios = 0, []
    for name, extra in workloads:
        rc, ratio = run_workload(a, pare, data, runs, n, p, name, extra)
        if ratio is None:
            return rc
        code = max(code, rc)
        ratios.append((" ".join(extra) if extra else "every survivor pruned", ratio))
    print("End to end, Python / pare: " + "; ".join(f"{w}: {r:.1f}x" for w, r in ratios))
    return code


if __name__ == "__main__":
    sys.exit(main())
