"""Shared by the benchmark drivers (bench_reduce.py, bench_project.py): reading /usr/bin/time -v
reports and the load average. Not a test; not run by CI."""

import re


def time_report(text):
    """(wall s, cpu s, peak RSS bytes) from the text /usr/bin/time -v writes."""

    def field(name):
        m = re.search(re.escape(name) + r":\s*(.+)", text)
        return m.group(1).strip() if m else None

    wall = 0.0
    for part in (field("Elapsed (wall clock) time (h:mm:ss or m:ss)") or "nan").split(":"):
        wall = wall * 60 + float(part)
    cpu = float(field("User time (seconds)") or "nan") + float(field("System time (seconds)") or "nan")
    rss = int(field("Maximum resident set size (kbytes)") or "0") * 1024
    return wall, cpu, rss


def load_average():
    try:
        with open("/proc/loadavg") as f:
            return " ".join(f.read().split()[:3])
    except OSError:
        return "?"
