#!/usr/bin/python3
"""The start-up restart of the `pare` binary (src/cli/main.cpp: glibc.malloc.hugetlb).

A process started without glibc.malloc.hugetlb in GLIBC_TUNABLES starts itself again with it
appended, once, keeping its arguments and the rest of its environment; a GLIBC_TUNABLES that
already names the setting is left alone; sanitizer builds (libasan mapped) and runs with a
--memory budget never restart. The
input is a named pipe, so the test can look at the running process (/proc/PID/environ, which an
exec replaces, and /proc/PID/maps) once it has opened its input.
Whatever the start, the outputs and an error's message and exit code are the same.
Run as `/usr/bin/python3 restart_test.py PATH_TO_PARE`.
"""

import os
import shutil
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "reference"))
from reference_common import Checks  # noqa: E402

# Invented, tiny: two groups, three features.
TEXT = "sample,a,b,c,group\n" + "".join(
    f"s{i},{i % 7 + 0.5},{(i * 3) % 11},{i % 2 * 2.25 + i % 5},{'x' if i % 2 else 'y'}\n" for i in range(40))


def environment(pid):
    """The environment a process was started with, as its NUL-separated entries. (glibc cuts its own
    copy of GLIBC_TUNABLES at each ':' as it reads it, so one setting can show as several entries.)"""
    with open(f"/proc/{pid}/environ", "rb") as f:
        return [e.decode() for e in f.read().split(b"\0") if e]


def seen_at_start(pare, work, env, more=()):
    """Starts `pare scan` on a named pipe; returns its environment once started, and whether it is a
    sanitizer build. (pare then refuses the pipe, which it cannot hash.)"""
    pipe = os.path.join(work, "input.csv")
    if os.path.exists(pipe):
        os.unlink(pipe)
    os.mkfifo(pipe)
    proc = subprocess.Popen([pare, "scan", pipe, "--label", "group", "--out", os.path.join(work, "pipe-out"), "--quiet",
                             *more],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    # Opening the pipe for writing waits until pare has opened it for reading: past start-up.
    with open(pipe, "w") as f:
        seen = environment(proc.pid)
        with open(f"/proc/{proc.pid}/maps") as m:
            sanitized = "libasan" in m.read()
        try:
            f.write(TEXT)
        except BrokenPipeError:
            pass
    proc.wait(timeout=120)
    os.unlink(pipe)
    return seen, sanitized


def main():
    if len(sys.argv) != 2:
        print("usage: restart_test.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    work = tempfile.mkdtemp(prefix="pare-restart-")
    try:
        base = {k: v for k, v in os.environ.items() if k not in ("GLIBC_TUNABLES", "LD_PRELOAD")}
        cases = [
            ("no GLIBC_TUNABLES", None, "glibc.malloc.hugetlb=1"),
            ("another tunable", "glibc.malloc.arena_max=8", "glibc.malloc.arena_max=8:glibc.malloc.hugetlb=1"),
            ("the setting turned off", "glibc.malloc.hugetlb=0", "glibc.malloc.hugetlb=0"),
        ]
        data = os.path.join(work, "data.csv")
        with open(data, "w") as f:
            f.write(TEXT)
        outputs = []
        for name, given, restarted in cases:
            env = dict(base)
            if given is not None:
                env["GLIBC_TUNABLES"] = given
            seen, sanitized = seen_at_start(pare, work, env)
            expected = given if sanitized else restarted
            want = expected.split(":") if expected is not None else []
            first = next((i for i, e in enumerate(seen) if e.startswith("GLIBC_TUNABLES=")), None)
            tunables = [] if first is None else [seen[first][len("GLIBC_TUNABLES="):]] + seen[first + 1:first + len(want)]
            checks.check(f"{name}: GLIBC_TUNABLES of the running process", tunables == want,
                         f"{':'.join(tunables)!r}, want {':'.join(want)!r}" + (" (sanitizer build)" if sanitized else ""))
            others = {e for e in seen if not e.startswith("GLIBC_TUNABLES=") and not e.startswith("glibc.")}
            checks.check(f"{name}: the rest of the environment is kept", others == {f"{k}={v}" for k, v in base.items()})
            out = os.path.join(work, f"out-{len(outputs)}")
            done = subprocess.run([pare, "scan", data, "--label", "group", "--out", out, "--quiet"], env=env,
                                  capture_output=True, text=True)
            checks.check(f"{name}: a run succeeds", done.returncode == 0, done.stderr.strip())
            outputs.append({n: open(os.path.join(out, n), "rb").read() for n in sorted(os.listdir(out))})
        # A run with a memory budget is not restarted.
        seen, _ = seen_at_start(pare, work, base, ["--memory", "64M"])
        checks.check("a run with --memory is not restarted", not any("glibc.malloc.hugetlb" in e for e in seen))

        # An error keeps its message and exit code (the arguments survive the restart).
        results = []
        for _, given, _ in cases:
            env = dict(base)
            if given is not None:
                env["GLIBC_TUNABLES"] = given
            done = subprocess.run([pare, "scan", os.path.join(work, "absent.csv"), "--out", os.path.join(work, "e")],
                                  env=env, capture_output=True, text=True)
            results.append((done.returncode, done.stderr))
        checks.check("a missing input fails with exit 3 and one line, however pare was started",
                     all(r == results[0] for r in results) and results[0][0] == 3 and results[0][1].count("\n") == 1,
                     repr(results[0]))
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{checks.passed} passed, {checks.failed} failed")
    return 1 if checks.failed else 0


if __name__ == "__main__":
    sys.exit(main())
