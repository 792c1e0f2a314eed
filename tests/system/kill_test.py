#!/usr/bin/python3
"""Kill-safety: `pare reduce` on a mid-size input, killed with SIGKILL at 20 random moments.

After every kill each output under its final name is either absent or complete and valid (the same
bytes as a complete run's; plan.json and report.html, which carry timings, parse and end where they
should); the input is unchanged byte for byte. A successful run afterwards leaves no temporary file
behind (it removes the parts the killed runs left). Run as `/usr/bin/python3 kill_test.py PATH_TO_PARE`.
"""

import hashlib
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "reference"))
from reference_common import Checks  # noqa: E402

import numpy as np  # noqa: E402


def write_input(path):
    """300 samples x 3,000 features with signal, gaps and redundancy (invented, seeded)."""
    rng = np.random.default_rng(20261202)
    n, p = 300, 3000
    x = rng.standard_normal((n, p))
    group = rng.integers(0, 2, n)
    x[:, :100] += group[:, None] * 0.8
    x[:, 1::7] = x[:, 0::7][:, : x[:, 1::7].shape[1]] + 0.05 * rng.standard_normal((n, len(range(1, p, 7))))
    text = np.char.mod("%.5g", x + 10)
    text[rng.random((n, p)) < 0.02] = "NA"
    with open(path, "w") as f:
        f.write("sample," + ",".join(f"f{j}" for j in range(p)) + ",group\n")
        for i in range(n):
            f.write(f"s{i}," + ",".join(text[i]) + (",b\n" if group[i] else ",a\n"))


def sha256(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def valid(name, data, reference):
    """Whether `data` (an output found under its final name) is complete and valid."""
    if name == "plan.json":
        try:
            plan = json.loads(data)
        except ValueError:
            return False
        want = json.loads(reference)
        return plan.get("kept") == want.get("kept") and plan.get("steps", [{}])[-1].get("step") == want["steps"][-1]["step"]
    if name == "report.html":
        return data.rstrip().endswith(b"</html>") and len(data) > 0.9 * len(reference)
    return data == reference


def main():
    if len(sys.argv) != 2:
        print("usage: kill_test.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    work = tempfile.mkdtemp(prefix="pare-kill-")
    try:
        data = os.path.join(work, "input.csv")
        write_input(data)
        before = sha256(data)
        args = [pare, "reduce", data, "--label", "group", "--components", "5", "--quiet"]

        # A complete run: the reference bytes and the time a run takes.
        reference_dir = os.path.join(work, "reference")
        start = time.monotonic()
        done = subprocess.run(args + ["--out", reference_dir], capture_output=True, text=True)
        duration = time.monotonic() - start
        checks.check("a complete run succeeds", done.returncode == 0, done.stderr.strip())
        reference = {n: open(os.path.join(reference_dir, n), "rb").read() for n in os.listdir(reference_dir)}

        out = os.path.join(work, "out")
        rng = random.Random(7)
        outcomes = {"killed before any output": 0, "killed with some outputs": 0, "finished": 0}
        for k in range(20):
            # Moments spread over the whole run, the commit at the end included.
            moment = rng.uniform(0.0, 1.1) * duration
            proc = subprocess.Popen(args + ["--out", out], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            time.sleep(moment)
            proc.send_signal(signal.SIGKILL)
            proc.wait()
            finals = sorted(n for n in os.listdir(out) if not n.startswith(".")) if os.path.isdir(out) else []
            bad = [n for n in finals if n not in reference or not valid(n, open(os.path.join(out, n), "rb").read(), reference[n])]
            checks.check(f"kill {k + 1} at {moment:.2f} s: every final-named output is complete and valid",
                         not bad, f"{len(finals)} present" if not bad else f"bad: {bad}")
            if proc.returncode == 0:
                outcomes["finished"] += 1
            elif finals:
                outcomes["killed with some outputs"] += 1
            else:
                outcomes["killed before any output"] += 1
            checks.check(f"kill {k + 1}: the input is unchanged", sha256(data) == before)

        print("outcomes: " + ", ".join(f"{v} {k}" for k, v in outcomes.items()))
        checks.check("some kills landed before the outputs were written", outcomes["killed before any output"] > 0)

        # A successful run afterwards: complete outputs and no temporary file left over.
        done = subprocess.run(args + ["--out", out], capture_output=True, text=True)
        checks.check("a run after the kills succeeds", done.returncode == 0, done.stderr.strip())
        leftovers = [n for n in os.listdir(out) if n.startswith(".")]
        checks.check("no temporary file is left behind", not leftovers, ", ".join(leftovers))
        finals = sorted(os.listdir(out))
        checks.check("the outputs are those of the complete run", finals == sorted(reference),
                     f"{finals} vs {sorted(reference)}")
        for n in finals:
            checks.check(f"{n} is complete", valid(n, open(os.path.join(out, n), "rb").read(), reference[n]))
        checks.check("the input is unchanged at the end", sha256(data) == before)
        # No cache file either: they are unlinked as soon as they are made.
        checks.check("no cache file in the output folder", not any(n.startswith(".pare-cache") for n in os.listdir(out)))
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{checks.passed} passed, {checks.failed} failed")
    return 1 if checks.failed else 0


if __name__ == "__main__":
    sys.exit(main())
