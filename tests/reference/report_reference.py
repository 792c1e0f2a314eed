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
  score curve    selection-log.tsv: every scored feature's mi, sorted here (largest first, ties in
                 input order); the --fdr cut at the last of them with chi2_q <= Q, the --keep cut
                 at the last ranking.tsv feature; for `pare rank`, ranking.tsv's mi column
  p-values       numpy.histogram(chi2_p of every scored feature, bins=20, range=(0, 1))
  strip plots    reduced.csv's values of the first 6 ranking.tsv features, sample by sample; each
                 class's quartiles with numpy.quantile (its default, linear interpolation)
  --mark-by      the sample sheet's batch column: every dot's hover text and colour (the legend's
                 colour for that value; "missing" for an empty cell)
  sample screen  numpy: the features chosen (missing <= 20%, variance > 0, most variable first),
                 mean-filled, standardised (ddof 1), numpy.linalg.svd scores (compared up to sign);
                 class medians, the robust sd (max of 1.4826 MAD and the 80th percentile /
                 scipy.stats.norm.ppf(0.9)) and the distance with numpy; the threshold with
                 scipy.stats.chi2.isf(0.05 / n, K)
  target         a continuous target, on scikit-learn's diabetes data as Debian's python3-sklearn ships
                 it (diabetes_data_raw.csv.gz, diabetes_target.csv.gz; 442 samples x 10 features):
                 bars = ranking.tsv's signed spearman_rho and spearman_q; the curve = |spearman_rho|
                 of every scored feature in selection-log.tsv, sorted; p-values = numpy.histogram of
                 its spearman_p; the scatter plots = reduced.csv's values against the dataset's own
                 target file; their captions = scipy.stats.spearmanr and pearsonr (%.3g) of the
                 float32 values pare holds against the target; with WIRED_TARGET_SAMPLES, every
                 sample dot's colour = the ramp (ColorBrewer Blues 3-9, recalled) interpolated here
  rendering      Debian's chromium, headless (--headless --no-sandbox --disable-gpu
                 --disable-background-networking), screenshot to PNG: the PNG's size (its IHDR) is
                 the window size, and the picture (read with PIL, Debian python3-pil) is not blank

Data: invented here (numpy, fixed seed): 90 samples x 500 features in two classes, an informative
block, near-copies of informative features, constant and mostly-missing features, 2% gaps, and two
planted outlier samples. Values are float32-rounded and written as the shortest decimal of that
float32's float64 value, so pare parses exactly the values the reference sees.

Prints one line per check, then `N passed, M failed, K skipped`; exits 1 on any failure. Missing
html5lib, chromium or PIL is a failure when CI=true (scripts/install-deps.sh installs them),
otherwise that part is skipped (exit 77, reported by ctest as skipped).

Parts the command line gains when it is wired to the library (issue 15 item 14) are switched on by
the WIRED_* constants below; while off, their checks print OFF and count for nothing.
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

SVG_NS = "{http://www.w3.org/2000/svg}"

from reference_common import Checks  # noqa: E402  (this folder is on sys.path)

# Switch on when the command line does it (then every check of that part must pass):
WIRED_TOP_FEATURES = True  # reduce puts strip plots of the first 6 kept features in report.html
WIRED_MARK_BY = True       # reduce --labels SHEET:COLUMN --mark-by batch
WIRED_RANK_REPORT = True   # pare rank writes report.html
WIRED_TARGET_SAMPLES = True  # reduce --target passes the target to add_screen (sample plots on the ramp)

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
    # The same values without the label column, and a sample sheet with the labels and a batch
    # column (three values and two empty cells) for --mark-by.
    base = os.path.splitext(path)[0]
    with open(base + "-values.csv", "w", newline="") as f:
        f.write(",".join(["sample"] + names) + "\n")
        for i in range(N):
            cells = ["" if math.isnan(v) else repr(float(v)) for v in x[i]]
            f.write(",".join([ids[i]] + cells) + "\n")
    batch = ["" if i in (5, 40) else "run" + "ABC"[i % 3 if i < 30 else (i // 7) % 3] for i in range(N)]
    with open(base + "-sheet.csv", "w", newline="") as f:
        f.write("sample,group,batch\n")
        for i in range(N):
            f.write(f"{ids[i]},{y[i]},{batch[i]}\n")
    return x, ids, names, y, batch


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
        checks.skip(f"{label}: strict parse", "html5lib missing (install python3-html5lib)")
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


def figure_after(tree, heading_id):
    """The element right after the <h3 id=heading_id> (its figure), or None."""
    for parent in tree.iter():
        children = list(parent)
        for k, child in enumerate(children):
            if local(child.tag) == "h3" and child.get("id") == heading_id and k + 1 < len(children):
                return children[k + 1]
    return None


def curve_points(tree):
    """(attributes, [(rank, value)]) of the score curve, or (None, [])."""
    curves = elements(tree, "g", "score-curve")
    if len(curves) != 1:
        return None, []
    points = [(int(a), float(b)) for a, b in (p.split(":") for p in curves[0].get("data-points").split())]
    return curves[0].attrib, points


def p_histogram_checks(checks, tree, p_values, label):
    """The p-value bars against numpy.histogram of `p_values` (20 bins on [0, 1])."""
    fig = figure_after(tree, "p-values")
    if fig is None:
        checks.check(f"{label}: p-value histogram present", False)
        return
    # reference: numpy.histogram, 20 equal bins on [0, 1] (half-open, the last closed)
    expected, edges = np.histogram(np.asarray(p_values, dtype=float), bins=20, range=(0.0, 1.0))
    shown = np.zeros(20, dtype=int)
    for g in (e for e in fig.iter() if local(e.tag) == "g" and e.get("class") == "bin"):
        k = int(round(float(g.get("data-from")) * 20))
        shown[k] += int(g.get("data-count"))
    checks.check(f"{label}: p-value bars = numpy.histogram(p, 20, (0, 1))", shown.tolist() == expected.tolist(),
                 f"{len(p_values)} p-values, first bar {shown[0]} (numpy {expected[0]})")
    level = [t for t in fig.iter() if local(t.tag) == "text" and "expected with no signal" in text_of(t)]
    checks.check(f"{label}: the uniform level is m / 20", len(level) == 1 and
                 text_of(level[0]) == f"expected with no signal: {'%.3g' % (len(p_values) / 20)} per bar",
                 text_of(level[0]) if level else "absent")


# ---- the reduce run ---------------------------------------------------------------------------

def scored_by_mi(log):
    """Rows of selection-log.tsv with scores, sorted by mi, largest first, ties in input order (a
    stable sort of the log, which is in input order)."""
    h = log[0]
    mi = h.index("mi")
    rows = [r for r in log[1:] if r[mi] != "NA"]
    return h, sorted(rows, key=lambda r: -float(r[mi]))


def curve_checks(checks, tree, log, ranking, label, fdr=None, keep=None):
    """The score curve against selection-log.tsv (and its cuts against the log and ranking.tsv)."""
    h, ordered = scored_by_mi(log)
    mi, q, feature = h.index("mi"), h.index("chi2_q"), h.index("feature")
    attrs, points = curve_points(tree)
    if attrs is None:
        checks.check(f"{label}: score curve present", False)
        return
    ok = attrs.get("data-count") == str(len(ordered)) and attrs.get("data-column") == "mi" and len(points) > 1
    ok = ok and all(1 <= r <= len(ordered) and v == float(ordered[r - 1][mi]) for r, v in points)
    ok = ok and points[0][0] == 1 and points[-1][0] == len(ordered)
    checks.check(f"{label}: curve = every scored feature's mi by rank (selection-log.tsv, sorted)", ok,
                 f"{len(points)} of {len(ordered)} ranks drawn")
    if keep is not None:
        # reference: the last ranking.tsv feature's place in the order of every scored feature
        position = {r[feature]: k + 1 for k, r in enumerate(ordered)}
        expected = position[ranking[-1][1]]
        checks.check(f"{label}: --keep cut at the rank of the last ranking.tsv feature",
                     attrs.get("data-keep") == str(keep) and attrs.get("data-keep-rank") == str(expected),
                     f"rank {expected} for {len(ranking) - 1} kept")
    if fdr is not None:
        passing = [k + 1 for k, r in enumerate(ordered) if float(r[q]) <= fdr]
        checks.check(f"{label}: --fdr cut at the last feature with chi2_q <= {fdr}",
                     attrs.get("data-fdr-rank") == str(passing[-1] if passing else 0)
                     and attrs.get("data-fdr-passed") == str(len(passing)),
                     f"{len(passing)} pass, the last at rank {passing[-1] if passing else 0}")


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

        # The score curve and the p-values (reference: selection-log.tsv, numpy.histogram).
        curve_checks(checks, tree, log, ranking, "reduce", keep=40)
        lh, ordered = scored_by_mi(log)
        p_histogram_checks(checks, tree, [float(r[lh.index("chi2_p")]) for r in ordered], "reduce")
        caution = elements(tree, "p", "caution")
        checks.check("PCA of the kept features: says they were selected using the labels",
                     len(caution) == 1 and "selected using the labels (group)" in text_of(caution[0]))
        if WIRED_TOP_FEATURES:
            strip_checks(checks, tree, out, ranking, ids)
        else:
            print("OFF strip plots (WIRED_TOP_FEATURES)")
    return out


def read_reduced(out):
    """reduced.csv as {sample id: {feature: cell text}} (rows=samples; any label column ignored)."""
    with open(os.path.join(out, "reduced.csv"), newline="") as f:
        rows = list(csv.reader(f))
    head = rows[0]
    return {r[0]: dict(zip(head[1:], r[1:])) for r in rows[1:]}


def strip_checks(checks, tree, out, ranking, ids):
    """Strip plots against reduced.csv and numpy.quantile."""
    strips = elements(tree, "g", "strip")
    names = [s.get("data-feature") for s in strips]
    checks.check("strip plots: the first 6 features of ranking.tsv, in order",
                 names == [r[1] for r in ranking[1:7]], f"{names}")
    reduced = read_reduced(out)
    labels = {}
    with open(os.path.join(out, "samples.tsv"), newline="") as f:
        for r in list(csv.reader(f, delimiter="\t"))[1:]:
            labels[r[0]] = r[1]
    values_ok, quartiles_ok, worst = True, True, 0.0
    for s in strips:
        feature = s.get("data-feature")
        dots = [c for c in s.iter() if local(c.tag) == "circle" and c.get("data-value") is not None]
        seen = {}
        for c in dots:
            sample = text_of(c[0]).split(" \u00b7 ")[0]
            seen[sample] = c.get("data-value")
        # reference: reduced.csv's cell of each sample, as text (both are the float's shortest form)
        values_ok &= sorted(seen) == sorted(ids) and all(
            float(v) == float(reduced[k][feature]) for k, v in seen.items())
        for g in (e for e in s.iter() if local(e.tag) == "g" and e.get("class") == "strip-group"):
            # The cells are float32 values written shortest: read them back as float32, as pare holds them.
            v = np.array([reduced[k][feature] for k in ids if labels[k] == g.get("data-class")],
                         dtype=np.float32).astype(np.float64)
            # reference: numpy.quantile, default method (linear interpolation)
            for attr, q in (("data-q1", 0.25), ("data-median", 0.5), ("data-q3", 0.75)):
                ref = float(np.quantile(v, q))
                dev = abs(float(g.get(attr)) - ref) / max(1.0, abs(ref))
                worst = max(worst, dev)
                quartiles_ok &= g.get("data-n") == str(len(v)) and dev < 1e-12
    checks.check("strip plots: every sample's value = reduced.csv", values_ok and len(strips) == 6)
    # Tolerance: the same interpolation on the same doubles; only rounding order may differ.
    checks.check("strip plots: class quartiles and medians = numpy.quantile", quartiles_ok,
                 f"largest relative difference {worst:.1e}")


def mark_checks(checks, pare, tmp, data, ids, batch):
    """--mark-by batch: the marked scatter's dots carry each sample's batch and its legend colour."""
    base = os.path.splitext(data)[0]
    out = os.path.join(tmp, "marked")
    run([pare, "reduce", base + "-values.csv", "--labels", base + "-sheet.csv:group", "--mark-by", "batch",
         "--keep", "40", "--components", "3", "--out", out], checks, "reduce --mark-by batch runs")
    tree = strict_parse(checks, os.path.join(out, "report.html"), "reduce --mark-by report")
    if tree is None:
        return
    svgs = [e for e in tree.iter() if local(e.tag) == "svg" and e.get("aria-label") == "Samples on PC1 and PC2 by batch"]
    legends = [u for u in elements(tree, "ul", "legend") if text_of(u).startswith("batch:")]
    colour = {}
    for li in (legends[0] if legends else []):
        circles = [c for c in li.iter() if local(c.tag) == "circle"]
        m = re.fullmatch(r"\s*(.*) \((\d+)\)", text_of(li))
        if circles and m:
            colour[m[1]] = (circles[0].get("fill"), int(m[2]))
    # reference: the sheet's batch column (empty cells are "missing"), counted here
    expected = {}
    for b in batch:
        expected[b or "missing"] = expected.get(b or "missing", 0) + 1
    checks.check("--mark-by: legend = the sheet's batch values and counts",
                 {k: n for k, (_, n) in colour.items()} == expected, f"{colour}")
    dots = [c for c in svgs[0].iter() if local(c.tag) == "circle" and c.get("fill") != "none"] if svgs else []
    by_id = dict(zip(ids, batch))
    ok = len(dots) == len(ids)
    for c in dots:
        parts = text_of(c[0]).split(" \u00b7 ")
        value = by_id[parts[0]] or "missing"
        ok &= f"batch {value}" in parts and colour.get(value, (None,))[0] == c.get("fill")
    checks.check("--mark-by: every dot has its batch on hover and the legend's colour", ok and bool(svgs),
                 f"{len(dots)} dots")


def rank_report_checks(checks, pare, tmp, data):
    """pare rank's report: the bars, the curve and the p-values against its ranking.tsv."""
    out = os.path.join(tmp, "rank")
    run([pare, "rank", data, "--label", "group", "--out", out], checks, "rank runs")
    tree = strict_parse(checks, os.path.join(out, "report.html"), "rank report")
    if tree is None:
        return
    ranking = read_tsv(os.path.join(out, "ranking.tsv"))
    h = ranking[0]
    mi, q, p = h.index("mi"), h.index("chi2_q"), h.index("chi2_p")
    bars = elements(tree, "g", "feature")
    checks.check("rank report: top 30 = ranking.tsv rows 1-30", len(bars) == 30 and all(
        g.get("data-name") == r[1] and g.get("data-value") == r[mi] and g.get("data-q") == r[q]
        for g, r in zip(bars, ranking[1:31])))
    # Without --fdr and --keep ranking.tsv holds every feature in ranking order: the curve is its mi.
    attrs, points = curve_points(tree)
    checks.check("rank report: curve = ranking.tsv's mi column by rank",
                 attrs is not None and attrs.get("data-count") == str(len(ranking) - 1) and
                 all(v == float(ranking[r][mi]) for r, v in points) and points[-1][0] == len(ranking) - 1,
                 f"{len(points)} ranks drawn")
    p_histogram_checks(checks, tree, [float(r[p]) for r in ranking[1:]], "rank report")


DIABETES = "/usr/lib/python3/dist-packages/sklearn/datasets/data"
DIABETES_NAMES = ["age", "sex", "bmi", "bp", "s1", "s2", "s3", "s4", "s5", "s6"]
RAMP = ["#C6DBEF", "#9ECAE1", "#6BAED6", "#4292C6", "#2171B5", "#08519C", "#08306B"]


def ramp_colour(t):
    """The ramp at t in [0, 1]: linear in sRGB between the stops, each channel rounded half away
    from zero (as C's lround)."""
    t = min(max(t, 0.0), 1.0) * (len(RAMP) - 1)
    k = min(int(t), len(RAMP) - 2)
    f = t - k
    out = "#"
    for at in range(3):
        a, b = int(RAMP[k][1 + 2 * at:3 + 2 * at], 16), int(RAMP[k + 1][1 + 2 * at:3 + 2 * at], 16)
        out += "%02X" % int(math.floor(a + f * (b - a) + 0.5))
    return out


def target_checks(checks, pare, tmp):
    """reduce --target on scikit-learn's diabetes data: the page in the target's words, the bars, the
    curve, the p-values and the scatter plots against the output files, numpy and scipy."""
    try:
        from scipy.stats import pearsonr, spearmanr
    except ImportError:
        checks.skip("target", "scipy missing (install python3-scipy)")
        return
    raw, tgt = os.path.join(DIABETES, "diabetes_data_raw.csv.gz"), os.path.join(DIABETES, "diabetes_target.csv.gz")
    if not (os.path.exists(raw) and os.path.exists(tgt)):
        checks.skip("target", "scikit-learn's diabetes data missing (install python3-sklearn)")
        return
    x, y = np.loadtxt(raw), np.loadtxt(tgt)
    ids = [f"p{i + 1:03d}" for i in range(len(y))]
    data = os.path.join(tmp, "diabetes.csv")
    with open(data, "w") as f:
        f.write(",".join(["sample"] + DIABETES_NAMES + ["progression"]) + "\n")
        for i in range(len(y)):
            f.write(",".join([ids[i]] + [repr(float(v)) for v in x[i]] + [repr(float(y[i]))]) + "\n")
    out = os.path.join(tmp, "target")
    run([pare, "reduce", data, "--target", "progression", "--components", "3", "--out", out], checks,
        "reduce --target runs (diabetes)")
    tree = strict_parse(checks, os.path.join(out, "report.html"), "target report")
    if tree is None:
        return
    ranking = read_tsv(os.path.join(out, "ranking.tsv"))
    log = read_tsv(os.path.join(out, "selection-log.tsv"))
    h = ranking[0]
    rho, q = h.index("spearman_rho"), h.index("spearman_q")
    # reference: ranking.tsv, signed rho (the bar is |rho|) and its q
    bars = elements(tree, "g", "feature")
    ok = len(bars) == len(ranking) - 1 and all(
        g.get("data-name") == r[1] and g.get("data-value") == r[rho] and g.get("data-q") == r[q] and
        [text_of(t) for t in g if local(t.tag) == "text"] == [r[1], "%.3g" % float(r[rho]), "%.3g" % float(r[q])]
        for g, r in zip(bars, ranking[1:]))
    checks.check("target: bars = ranking.tsv's signed spearman_rho and spearman_q (attributes and %.3g text)", ok,
                 f"{len(bars)} bars")
    # reference: selection-log.tsv, |spearman_rho| of every scored feature, sorted (stable)
    lh = log[0]
    scored = [r for r in log[1:] if r[lh.index("spearman_rho")] != "NA"]
    ordered = sorted(scored, key=lambda r: -abs(float(r[lh.index("spearman_rho")])))
    attrs, points = curve_points(tree)
    checks.check("target: curve = |spearman_rho| of every scored feature by rank (selection-log.tsv)",
                 attrs is not None and attrs.get("data-column") == "spearman_rho" and
                 attrs.get("data-absolute") == "true" and attrs.get("data-count") == str(len(ordered)) and
                 all(v == abs(float(ordered[r - 1][lh.index("spearman_rho")])) for r, v in points),
                 f"{len(points)} ranks drawn")
    p_histogram_checks(checks, tree, [float(r[lh.index("spearman_p")]) for r in scored], "target")
    # No class wording in the ranking and top-feature sections.
    words = []
    for section in (e for e in tree.iter() if local(e.tag) == "section" and e.get("id") in ("ranking", "top-features")):
        t = text_of(section).lower()
        words += [w for w in ("class", "label", "chi2", "chi-square", "anova") if w in t]
    checks.check("target: no class wording in the ranking and top-feature sections", not words, f"{words}")
    # reference: reduced.csv's cells, the dataset's target file, scipy's correlations
    panels = elements(tree, "g", "target-scatter")
    names = [g.get("data-feature") for g in panels]
    checks.check("target: scatter plots of the first 6 ranking.tsv features, in order",
                 names == [r[1] for r in ranking[1:7]], f"{names}")
    reduced = read_reduced(out)
    by_id = dict(zip(ids, y))
    values_ok, captions_ok = True, True
    for g in panels:
        feature = g.get("data-feature")
        dots = [c for c in g.iter() if local(c.tag) == "circle"]
        seen = {text_of(c[0]).split(" \u00b7 ")[0]: c for c in dots}
        values_ok &= sorted(seen) == sorted(ids) and all(
            float(c.get("data-value")) == float(reduced[k][feature]) and float(c.get("data-target")) == by_id[k]
            for k, c in seen.items())
        v = np.array([reduced[k][feature] for k in ids], dtype=np.float32).astype(np.float64)
        expected = "Spearman rho %.3g, Pearson r %.3g" % (spearmanr(v, y)[0], pearsonr(v, y)[0])
        caption = [text_of(c) for c in tree.iter() if local(c.tag) == "figcaption" and text_of(c).startswith("Spearman")]
        captions_ok &= expected in caption
    checks.check("target: every dot = (the dataset's target, reduced.csv's value), all 442 samples", values_ok and panels)
    checks.check("target: captions = scipy.stats.spearmanr and pearsonr (%.3g)", captions_ok and panels)
    if not WIRED_TARGET_SAMPLES:
        print("OFF target: sample plots on the ramp (WIRED_TARGET_SAMPLES)")
        return
    # reference: the ramp interpolated here, linear in the target over its range
    svgs = [e for e in tree.iter() if local(e.tag) == "svg" and e.get("aria-label") == "Samples on PC1 and PC2"]
    dots = [c for c in svgs[0].iter() if local(c.tag) == "circle" and c.get("fill") != "none"] if svgs else []
    lo, hi = float(np.min(y)), float(np.max(y))
    ok = len(dots) == len(ids) and all(
        c.get("fill") == ramp_colour((by_id[text_of(c[0]).split(" \u00b7 ")[0]] - lo) / (hi - lo)) for c in dots)
    checks.check("target: every sample dot's colour = the ramp at its target value", ok, f"{len(dots)} dots")


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
        checks.skip("render", "chromium not found (install Debian's chromium, scripts/install-deps.sh)")
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
        checks.skip("render: pixel checks", "PIL missing (install python3-pil)")
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
        x, ids, names, _, batch = make_data(data)
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
            tree = strict_parse(checks, os.path.join(d, "report.html"), f"{command} report")
            if tree is not None and command == "project":
                checks.check("project report: no word of label-chosen features (none were chosen)",
                             not elements(tree, "p", "caution"))

        # --fdr and --keep together: both cuts on the curve where the log puts them.
        fdr = os.path.join(tmp, "fdr")
        run([pare, "reduce", data, "--label", "group", "--fdr", "0.05", "--keep", "25", "--out", fdr],
            checks, "reduce --fdr 0.05 --keep 25 runs")
        tree = strict_parse(checks, os.path.join(fdr, "report.html"), "reduce --fdr report")
        if tree is not None:
            curve_checks(checks, tree, read_tsv(os.path.join(fdr, "selection-log.tsv")),
                         read_tsv(os.path.join(fdr, "ranking.tsv")), "reduce --fdr 0.05 --keep 25", fdr=0.05, keep=25)

        if WIRED_MARK_BY:
            mark_checks(checks, pare, tmp, data, ids, batch)
        else:
            print("OFF --mark-by (WIRED_MARK_BY)")
        if WIRED_RANK_REPORT:
            rank_report_checks(checks, pare, tmp, data)
        else:
            print("OFF rank's report (WIRED_RANK_REPORT)")

        target_checks(checks, pare, tmp)
        render_checks(checks, os.path.join(out, "report.html"), tmp)
    checks.summary(f" ({time.monotonic() - started:.1f} s)")
    return checks.exit_code()


if __name__ == "__main__":
    sys.exit(main())
