#!/usr/bin/python3
"""Checks of report.html and samples.tsv on a small synthetic run of `pare reduce`, `scan` and
`project`: the page parses cleanly with a strict HTML parser, its numbers equal the output files,
the sample screen agrees with numpy/scipy, and headless Chromium renders it.

Run as `/usr/bin/python3 report_reference.py PATH_TO_PARE` (ctest does).

References, each named again beside its check:
  strict HTML    html5lib (Debian python3-html5lib) with strict=True: any parse error of the HTML
                 standard's parsing algorithm is a failure; each inline <svg> is also parsed as XML
                 by xml.etree.ElementTree (it must be well-formed on its own)
  funnel         plan.json's "steps" (name, in, out), as shown in the text of each funnel row
  top 30         ranking.tsv's first 30 rows: feature, the ranking criterion's column and its q-value
                 column, both as data attributes (exact) and as the printed text (%.3g)
  redundancy     selection-log.tsv: how many redundancy rows name each kept feature
  sample screen  numpy: the features chosen (missing <= 20%, variance > 0, most variable first),
                 mean-filled, standardised (ddof 1), numpy.linalg.svd scores (compared up to sign);
                 class medians, the robust sd (max of 1.4826 MAD and the 80th percentile /
                 scipy.stats.norm.ppf(0.9)) and the distance with numpy; the threshold with
                 scipy.stats.chi2.isf(0.05 / n, K)
  rendering      Debian's chromium, headless (--headless --no-sandbox --disable-gpu
                 --disable-background-networking), screenshot to PNG: the PNG's size (its IHDR) is
                 the window size, and the picture (read with PIL, Debian python3-pil) is not blank

Data: invented here (numpy, fixed seed): 90 samples x 500 features in two classes, an informative
block, near-copies of informative features, constant and mostly-missing features, 2% gaps, and two
planted outlier samples. Values are float32-rounded and written as the shortest decimal of that
float32's float64 value, so pare parses exactly the values the reference sees.

Prints one line per check, then `N passed, M failed`; exits 1 on any failure. Missing html5lib,
chromium or PIL is a failure when CI=true (scripts/install-deps.sh installs them), otherwise that
part is skipped with a message.
"""

import csv
import json
import math
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET

import numpy as np

IN_CI = os.environ.get("CI", "").lower() == "true"
SVG_NS = "{http://www.w3.org/2000/svg}"

from reference_common import Checks  # noqa: E402  (this folder is on sys.path)

N, P = 90, 500
PLANTED = ["s0012", "s0061"]


def make_data(path):
    rng = np.random.default_rng(20240917)
    y = np.array(["dry" if i % 3 == 0 else "wet" for i in range(N)])
    x = rng.normal(size=(N, P)) + 5.0
    x[:, :30] += np.where(y == "dry", 1.2, 0.0)[:, None] * np.linspace(0.5, 1.5, 30)
    factor = rng.normal(size=N)
    x[:, 30:90] += 0.8 * factor[:, None]
    x[:, 90:110] = x[:, 0:20] + 0.05 * rng.normal(size=(N, 20))  # near-copies: redundancy
    x[:, 110:118] = 3.0  # constant
    x[11, :] += 2.0  # s0012: every feature shifted
    x[60, 30:90] += 0.8 * 8.0  # s0061: extreme on the factor
    x = x.astype(np.float32).astype(np.float64)
    gaps = rng.random(size=(N, P)) < 0.02
    gaps[:, 118:128] = rng.random(size=(N, 10)) < 0.4  # mostly missing
    x[gaps] = np.nan
    ids = [f"s{i + 1:04d}" for i in range(N)]
    names = [f"gene_{j:03d}" for j in range(P)]
    with open(path, "w", newline="") as f:
        f.write(",".join(["sample"] + names + ["group"]) + "\n")
        for i in range(N):
            cells = ["" if math.isnan(v) else repr(float(v)) for v in x[i]]
            f.write(",".join([ids[i]] + cells + [y[i]]) + "\n")
    return x, ids, names, y


def run(cmd, checks, name):
    r = subprocess.run(cmd, capture_output=True, text=True)
    ok = r.returncode == 0
    checks.check(name, ok, "" if ok else f"exit {r.returncode}: {r.stderr.strip()}")
    return r


def read_tsv(path):
    with open(path, newline="") as f:
        return list(csv.reader(f, delimiter="\t"))


# ---- strict parse -----------------------------------------------------------------------------

def strict_parse(checks, html_path, label):
    """The parsed tree (html5lib, strict), or None."""
    try:
        import html5lib
    except ImportError:
        if IN_CI:
            checks.check(f"{label}: html5lib available (CI=true)", False, "install python3-html5lib")
        else:
            print(f"SKIP {label}: strict parse (html5lib missing; install python3-html5lib; a failure under CI=true)")
        return None
    with open(html_path, "rb") as f:
        raw = f.read()
    text = raw.decode("utf-8")  # invalid UTF-8 raises here: that is a failure too
    # reference: html5lib strict mode raises ParseError at the first parse error of the HTML standard
    parser = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False)
    try:
        tree = parser.parse(text)
    except Exception as e:  # html5lib.html5parser.ParseError
        checks.check(f"{label}: strict HTML parse (html5lib strict=True)", False, f"{type(e).__name__}: {e}")
        return None
    checks.check(f"{label}: strict HTML parse (html5lib strict=True)", True, f"{len(raw):,} bytes")
    # reference: xml.etree.ElementTree, each inline SVG as a standalone XML document
    svgs = re.findall(r"<svg\b.*?</svg>", text, flags=re.S)
    bad = []
    for k, s in enumerate(svgs):
        try:
            ET.fromstring(s)
        except ET.ParseError as e:
            bad.append(f"svg {k}: {e}")
    checks.check(f"{label}: every inline SVG is well-formed XML", svgs and not bad, f"{len(svgs)} SVGs " + "; ".join(bad[:3]))
    # Self-contained: no script, no fetched resource of any kind.
    fetched = re.findall(r"<script|<link|<img|<iframe|\bsrc=|\bhref=|url\(|@import|@font-face", text)
    addresses = re.findall(r"https?://[^\s\"'<>]+", text)
    checks.check(f"{label}: no script, nothing fetched",
                 not fetched and set(addresses) <= {"http://www.w3.org/2000/svg"}, f"{fetched[:3]} {sorted(set(addresses))[:3]}")
    checks.check(f"{label}: printable (@media print rules)", "@media print" in text)
    return tree


def local(tag):
    return tag.split("}", 1)[-1] if isinstance(tag, str) else ""


def elements(tree, tag, cls):
    return [e for e in tree.iter() if local(e.tag) == tag and cls in (e.get("class") or "").split()]


def text_of(e):
    return "".join(e.itertext())


def number(text):
    return int(text.replace(",", ""))


# ---- the reduce run ---------------------------------------------------------------------------

def reduce_checks(checks, pare, tmp, data, x, ids, names):
    out = os.path.join(tmp, "reduce")
    run([pare, "reduce", data, "--label", "group", "--keep", "40", "--components", "3", "--out", out],
        checks, "reduce runs")
    html = os.path.join(out, "report.html")
    tree = strict_parse(checks, html, "reduce report")
    with open(os.path.join(out, "plan.json")) as f:
        plan = json.load(f)
    ranking = read_tsv(os.path.join(out, "ranking.tsv"))
    log = read_tsv(os.path.join(out, "selection-log.tsv"))
    if tree is not None:
        # reference: plan.json "steps"
        rows = elements(tree, "g", "step")
        shown = []
        for g in rows:
            texts = [t for t in g if local(t.tag) == "text"]
            m = re.fullmatch(r"([\d,]+) \u2192 ([\d,]+)(?: \(\u2212([\d,]+)\))?", text_of(texts[-1]))
            shown.append((g.get("data-step"), int(g.get("data-in")), int(g.get("data-out")),
                          (number(m[1]), number(m[2]), number(m[3]) if m and m[3] else 0) if m else None))
        expected = [(s["step"], s["in"], s["out"]) for s in plan["steps"]]
        checks.check("funnel: steps and counts (data attributes) = plan.json steps",
                     [(a, b, c) for a, b, c, _ in shown] == expected, f"{len(shown)} steps")
        checks.check("funnel: printed in -> out (and removed) = plan.json steps",
                     all(t is not None and t == (b, c, b - c) for _, b, c, t in shown) and len(shown) == len(expected))
        checks.check("funnel: some step removed features (the check can fail)", any(b > c for _, b, c, _ in shown))

        # reference: ranking.tsv, first 30 rows; criterion mi, q-value chi2_q
        header = ranking[0]
        col, qcol = header.index("mi"), header.index("chi2_q")
        bars = elements(tree, "g", "feature")
        expected = ranking[1:31]
        attrs_ok = len(bars) == len(expected) == 30 and all(
            g.get("data-rank") == r[0] and g.get("data-name") == r[1] and g.get("data-value") == r[col]
            and g.get("data-q") == r[qcol] for g, r in zip(bars, expected))
        checks.check("top 30: names, mi and chi2_q (data attributes) = ranking.tsv rows 1-30 exactly", attrs_ok)
        printed_ok = True
        for g, r in zip(bars, expected):
            texts = [text_of(t) for t in g if local(t.tag) == "text"]
            printed_ok &= texts == [r[1], "%.3g" % float(r[col]), "%.3g" % float(r[qcol])]
        checks.check("top 30: printed name, mi and q (%.3g) = ranking.tsv", printed_ok and len(bars) == 30)

        # reference: selection-log.tsv redundancy rows, counted per kept feature they name
        lh = log[0]
        step, reason = lh.index("step"), lh.index("reason")
        counts = {}
        for r in log[1:]:
            if r[step] == "redundancy":
                m = re.search(r"with (\S+) \(kept", r[reason])
                counts[m[1]] = counts.get(m[1], 0) + 1
        groups = elements(tree, "g", "group")
        shown = [(g.get("data-name"), int(g.get("data-value"))) for g in groups]
        largest = sorted(counts.values(), reverse=True)[:len(shown)]
        checks.check("redundancy: each bar's count = selection-log.tsv rows naming that feature",
                     shown and all(counts.get(n) == c for n, c in shown) and [c for _, c in shown] == largest,
                     f"{sum(counts.values())} redundant features, {len(counts)} groups")

        # Scatter: every sample has a dot with its id as a tooltip (90 < the thinning limit).
        svgs = [e for e in tree.iter() if local(e.tag) == "svg" and e.get("aria-label") == "Samples on PC1 and PC2"]
        dots = [c for c in svgs[0].iter() if local(c.tag) == "circle" and c.get("fill") != "none"] if svgs else []
        tips = sorted(text_of(c[0]).split(" \u00b7 ")[0] for c in dots if len(c))
        checks.check("PC1 vs PC2: one dot per sample, its id on hover (SVG title)", tips == sorted(ids), f"{len(dots)} dots")
        rings = [text_of(c[0]).split(" \u00b7 ")[0] for c in svgs[0].iter()
                 if local(c.tag) == "circle" and c.get("fill") == "none"] if svgs else []
        checks.check("PC1 vs PC2: the flagged samples are ringed", sorted(rings) == PLANTED, f"{rings}")
    return out


def robust_distance(scores, groups):
    """Each component: scores minus their class's median, over the larger of 1.4826 x the MAD and
    the 80th percentile / 1.2816 of all those differences; the distance is the root of the sum of
    squares."""
    resid = scores.copy()
    for g in np.unique(groups):
        rows = groups == g
        if rows.sum() >= 5:
            resid[rows] -= np.median(scores[rows], axis=0)
        else:
            resid[rows] -= np.median(scores, axis=0)
    a = np.abs(resid)
    # the larger of 1.4826 MAD and the 80th percentile / Phi^-1(0.9) (scipy.stats.norm.ppf(0.9))
    from scipy.stats import norm
    spread = np.maximum(1.482602218505602 * np.median(a, axis=0), np.quantile(a, 0.8, axis=0) / norm.ppf(0.9))
    return np.sqrt(((resid / spread) ** 2).sum(1))


def screen_checks(checks, out, x, ids):
    """samples.tsv against numpy/scipy."""
    from scipy.stats import chi2

    rows = read_tsv(os.path.join(out, "samples.tsv"))
    h = rows[0]
    checks.check("samples.tsv: header", h == ["sample", "group", "missing", "missing_rate", "screen_pc1", "screen_pc2",
                                               "screen_pc3", "distance", "outlier", "dropped"], str(h))
    body = rows[1:]
    checks.check("samples.tsv: one row per sample, in input order", [r[0] for r in body] == ids)
    miss = np.isnan(x).sum(1)
    checks.check("samples.tsv: missing cells per sample = numpy count of gaps",
                 [int(r[2]) for r in body] == miss.tolist() and
                 all(float(r[3]) == m / P for r, m in zip(body, miss)))
    scores = np.array([[float(v) for v in r[4:7]] for r in body])
    distance = np.array([float(r[7]) for r in body])
    flagged = [r[0] for r in body if r[8] == "yes"]

    # reference: numpy re-implementation of the screening PCA (features with <= 20% missing and
    # variance > 0, mean-filled as float32, standardised with ddof 1; at most 5,000: all here)
    obs = ~np.isnan(x)
    rate = 1 - obs.mean(0)
    var = np.nanvar(x, axis=0, ddof=1)
    keep = np.where((rate <= 0.2) & (obs.sum(0) >= 2) & (var > 0))[0]
    z = x[:, keep].copy()
    fill = np.nanmean(z, axis=0).astype(np.float32).astype(np.float64)
    z = np.where(np.isnan(z), fill, z)
    z = (z - z.mean(0)) / z.std(0, ddof=1)
    u, s, _ = np.linalg.svd(z, full_matrices=False)
    ref = u[:, :3] * s[:3]
    # Compare up to sign; tolerance: pare centres and scales the float32 copy in float32, so about
    # 1e-6 relative to the largest score, with margin.
    worst = 0.0
    for k in range(3):
        sign = 1.0 if np.dot(ref[:, k], scores[:, k]) >= 0 else -1.0
        worst = max(worst, np.max(np.abs(sign * ref[:, k] - scores[:, k])) / np.max(np.abs(ref[:, k])))
    checks.check("screen: PC scores = numpy SVD of the standardised, mean-filled features (up to sign)",
                 worst < 1e-4, f"largest relative difference {worst:.2e} over {len(keep)} features")

    # reference: numpy median/MAD and scipy.stats.chi2.isf on pare's own scores (same arithmetic);
    # with labels each sample is measured from its class's median (classes of 5 or more)
    groups = np.array([r[1] for r in body])
    d = robust_distance(scores, groups)
    threshold = math.sqrt(chi2.isf(0.05 / len(ids), 3))
    checks.check("screen: distance = sqrt(sum(((score - class median) / robust sd)^2)) (numpy)",
                 np.max(np.abs(d - distance) / np.maximum(d, 1e-300)) < 1e-12,
                 f"largest relative difference {np.max(np.abs(d - distance) / np.maximum(d, 1e-300)):.1e}")
    checks.check("screen: flags = distance > sqrt(chi2.isf(0.05 / n, 3)) (scipy)",
                 flagged == [i for i, v in zip(ids, distance) if v > threshold], f"threshold {threshold:.6f}")
    with open(os.path.join(out, "plan.json")) as f:
        plan = json.load(f)
    checks.check("screen: plan.json threshold = scipy's", abs(plan["sample_screen"]["threshold"] - threshold) < 1e-9 * threshold)
    # The reference's own scores flag the same samples, and those are the planted ones.
    dref = robust_distance(ref, groups)
    checks.check("screen: numpy's scores flag the same samples", [i for i, v in zip(ids, dref) if v > threshold] == flagged)
    checks.check("screen: the planted outliers are flagged, no other sample", flagged == PLANTED, f"{flagged}")


# ---- rendering ----------------------------------------------------------------------------------

def png_size(path):
    """(width, height) from the PNG's IHDR chunk (PNG specification, section 11.2.2)."""
    with open(path, "rb") as f:
        head = f.read(24)
    assert head[:8] == b"\x89PNG\r\n\x1a\n" and head[12:16] == b"IHDR", "not a PNG"
    return struct.unpack(">II", head[16:24])


def render_checks(checks, html, tmp):
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        if IN_CI:
            checks.check("chromium available (CI=true)", False, "install Debian's chromium (scripts/install-deps.sh)")
        else:
            print("SKIP render: chromium not found (install Debian's chromium; a failure under CI=true)")
        return
    width, height = 1200, 1600
    png = os.path.join(tmp, "report.png")
    profile = os.path.join(tmp, "chromium-profile")
    cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
           f"--user-data-dir={profile}", "--hide-scrollbars", f"--window-size={width},{height}",
           f"--screenshot={png}", "file://" + os.path.abspath(html)]
    started = time.monotonic()
    try:
        r = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
        code, err = r.returncode, r.stderr
    except subprocess.TimeoutExpired:
        code, err = "timeout", ""
    seconds = time.monotonic() - started
    ok = code == 0 and os.path.exists(png)
    checks.check("render: headless chromium writes a screenshot", ok,
                 f"{seconds:.1f} s" if ok else f"exit {code}: {err.strip()[-400:]}")
    if not ok:
        return
    w, h = png_size(png)
    # reference: the PNG's IHDR
    checks.check("render: the PNG has the window's size", (w, h) == (width, height), f"{w} x {h}")
    try:
        from PIL import Image
    except ImportError:
        if IN_CI:
            checks.check("render: PIL available to read the picture (CI=true)", False, "install python3-pil")
        else:
            print("SKIP render: pixel checks (PIL missing; install python3-pil; a failure under CI=true)")
        return
    pixels = np.asarray(Image.open(png).convert("RGB"), dtype=np.int32)
    # Not blank: enough ink, and the palette's blue (the funnel, the bars, the dots) and
    # vermillion (what the filters removed) both appear.
    ink = np.count_nonzero(pixels.sum(axis=2) < 720)
    near = lambda rgb: np.count_nonzero(np.all(np.abs(pixels - np.array(rgb)) < 12, axis=2))
    blue, vermillion = near((0x00, 0x72, 0xB2)), near((0xD5, 0x5E, 0x00))
    checks.check("render: the picture is not blank (more than 3% ink)", ink > 0.03 * w * h,
                 f"{100 * ink / (w * h):.1f}% of pixels")
    checks.check("render: palette blue and vermillion are drawn", blue > 2000 and vermillion > 50,
                 f"{blue} blue, {vermillion} vermillion pixels")


def main():
    if len(sys.argv) != 2:
        print("usage: report_reference.py PATH_TO_PARE", file=sys.stderr)
        return 2
    pare = os.path.abspath(sys.argv[1])
    checks = Checks()
    started = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="pare-report-ref-") as tmp:
        data = os.path.join(tmp, "data.csv")
        x, ids, names, _ = make_data(data)
        out = reduce_checks(checks, pare, tmp, data, x, ids, names)
        screen_checks(checks, out, x, ids)

        # --drop-outliers: the page still parses; the flagged samples are gone from the reduction.
        drop = os.path.join(tmp, "drop")
        run([pare, "reduce", data, "--label", "group", "--keep", "40", "--components", "3", "--drop-outliers",
             "--out", drop], checks, "reduce --drop-outliers runs")
        strict_parse(checks, os.path.join(drop, "report.html"), "reduce --drop-outliers report")
        with open(os.path.join(drop, "reduced.csv")) as f:
            kept_ids = [line.split(",", 1)[0] for line in f.read().splitlines()[1:]]
        checks.check("--drop-outliers: reduced.csv lacks exactly the flagged samples",
                     kept_ids == [i for i in ids if i not in PLANTED])

        for command, extra in (("scan", ["--label", "group"]), ("project", ["--label", "group", "--components", "3"])):
            d = os.path.join(tmp, command)
            run([pare, command, data] + extra + ["--out", d], checks, f"{command} runs")
            strict_parse(checks, os.path.join(d, "report.html"), f"{command} report")

        render_checks(checks, os.path.join(out, "report.html"), tmp)
    print(f"{checks.passed} passed, {checks.failed} failed ({time.monotonic() - started:.1f} s)")
    return 1 if checks.failed else 0


if __name__ == "__main__":
    sys.exit(main())
