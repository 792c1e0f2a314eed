#!/usr/bin/python3
"""Extreme shapes: a 200 MB single line and a header of 1,000,000 columns.

Each ends in a clear one-line error or a correct result, within a bounded time and memory.
Run as `/usr/bin/python3 extreme_test.py PATH_TO_PARE`.
"""

import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "reference"))
from reference_common import Checks  # noqa: E402

MB = 1_000_000


def run(args):
    """Runs pare; returns (completed process, seconds, peak RSS of this child in MB)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    start = time.monotonic()
    done = subprocess.run(args, capture_output=True, text=True, errors="replace")
    seconds = time.monotonic() - start
    # ru_maxrss of RUSAGE_CHILDREN is the largest child so far; children here only grow.
    peak = max(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, before) / 1024
    return done, seconds, peak


def one_error_line(done):
    return done.returncode != 0 and done.stderr.count("\n") == 1 and done.stdout == ""


def main():
    if len(sys.argv) != 2:
        print("usage: extreme_test.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    work = tempfile.mkdtemp(prefix="pare-extreme-")
    try:
        # 1. One line of 200 MB and no line break: a header of about 22 million names, no data.
        path = os.path.join(work, "one-line.csv")
        with open(path, "w") as f:
            written = 0
            j = 0
            f.write("sample")
            while written < 200 * MB:
                chunk = "".join(f",f{k:07d}" for k in range(j, j + 100_000))
                f.write(chunk)
                written += len(chunk)
                j += 100_000
        done, seconds, peak = run([pare, "scan", path, "--out", os.path.join(work, "o1"), "--quiet"])
        checks.check("a 200 MB header with no data: one error line, exit 3",
                     one_error_line(done) and done.returncode == 3, done.stderr.strip()[:200])
        checks.check("... saying there are no data lines", "no data lines" in done.stderr, done.stderr.strip()[:200])
        checks.check("... quickly and within memory", seconds < 60 and peak < 2000, f"{seconds:.1f} s, {peak:.0f} MB")
        os.remove(path)

        # 2. A data line of 200 MB: one number of 200 million digits.
        path = os.path.join(work, "long-value.csv")
        with open(path, "w") as f:
            f.write("sample,a,b\ns0,1,2\ns1,")
            for _ in range(200):
                f.write("9" * MB)
            f.write(",3\n")
        done, seconds, peak = run([pare, "scan", path, "--out", os.path.join(work, "o2"), "--quiet"])
        checks.check("a 200 MB value: one error line, exit 3", one_error_line(done) and done.returncode == 3,
                     done.stderr.strip()[:200])
        checks.check("... pointing at line 3, column 4", ":3:4:" in done.stderr, done.stderr.strip()[:200])
        checks.check("... quoting a shortened value", len(done.stderr) < 600, f"{len(done.stderr)} characters")
        checks.check("... quickly and within memory", seconds < 60 and peak < 2000, f"{seconds:.1f} s, {peak:.0f} MB")
        os.remove(path)

        # 3. A header of 1,000,000 feature columns, six samples in two classes.
        p = 1_000_000
        path = os.path.join(work, "wide.csv")
        with open(path, "w") as f:
            f.write("sample," + ",".join(f"g{j}" for j in range(p)) + ",label\n")
            for i in range(6):
                # Feature j: (j * (i + 3)) mod 97, shifted by 50 in class b for every 1000th feature.
                row = ",".join(str((j * (i + 3)) % 97 + (50 if i % 2 and j % 1000 == 0 else 0)) for j in range(p))
                f.write(f"s{i}," + row + (",b\n" if i % 2 else ",a\n"))
        done, seconds, peak = run([pare, "scan", path, "--label", "label", "--out", os.path.join(work, "o3"),
                                   "--quiet"])
        checks.check("1,000,000 columns: scan succeeds", done.returncode == 0, done.stderr.strip()[:200])
        checks.check("... quickly and within memory", seconds < 120 and peak < 4000, f"{seconds:.1f} s, {peak:.0f} MB")
        profile = os.path.join(work, "o3", "profile.tsv")
        lines = sum(1 for _ in open(profile)) if os.path.exists(profile) else 0
        checks.check("... profile.tsv has a line per feature", lines == p + 1, f"{lines} lines")
        out = os.path.join(work, "o4")
        done, seconds, peak = run([pare, "reduce", path, "--label", "label", "--keep", "10", "--components", "2",
                                   "--out", out, "--quiet"])
        checks.check("1,000,000 columns: reduce --keep 10 succeeds", done.returncode == 0, done.stderr.strip()[:200])
        checks.check("... quickly and within memory", seconds < 180 and peak < 6000, f"{seconds:.1f} s, {peak:.0f} MB")
        log = os.path.join(out, "selection-log.tsv")
        lines = sum(1 for _ in open(log)) if os.path.exists(log) else 0
        checks.check("... the selection log explains every one of the 1,000,000 features", lines == p + 1,
                     f"{lines} lines")
        header = open(os.path.join(out, "reduced.csv")).readline().rstrip("\n").split(",") if lines else []
        checks.check("... reduced.csv keeps 10 features (id + 10 columns, no label)", len(header) == 11,
                     f"{len(header)} columns")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{checks.passed} passed, {checks.failed} failed")
    return 1 if checks.failed else 0


if __name__ == "__main__":
    sys.exit(main())
