#!/usr/bin/python3
"""The HTML report checked from outside: covergrid runs two small scenarios
(exact, and Monte Carlo only), writes their reports, and this script parses
each page as XML (xml.etree.ElementTree, Python's standard library) and holds
it to the cube read with h5py (Debian 12's python3-h5py 3.7.0, numpy 1.24.2;
versions printed): every drawn value equals the cube's value bit for bit,
heat-map bins are the minima of their cells and sit in their colour class,
trade-off points and table figures are the cube's summaries, the trade-off
labels collide with nothing and stay inside their SVG (their widths measured
with FreeType, PIL), far-off methods sit under a broken axis, coverage panels
are at least 300 x 160 pixels, every method and axis title appears, the cube's SHA-256 matches hashlib, and the page refers
to nothing outside itself (no script, no src, no href but #fragments, no
@import or url() in CSS).
Usage: check_report.py COVERGRID_EXE DIR"""
import hashlib
import os
import re
import subprocess
import sys
import xml.etree.ElementTree as ET

import h5py
import numpy as np

exe, work = sys.argv[1], sys.argv[2]
os.makedirs(work, exist_ok=True)
XH = "{http://www.w3.org/1999/xhtml}"
SV = "{http://www.w3.org/2000/svg}"

EXACT = """title = "Report check: relay contacts <welded> & 'stuck'"
seed = 812
[grid]
n = { from = 3, to = 40 }
p = { from = 0.01, to = 0.6, count = 61, spacing = "logit" }
levels = [0.9, 0.95]
sides = ["two-sided", "lower-bound"]
[[method]]
id = "wilson"
[[method]]
id = "wald"
[[method]]
id = "clopper-pearson"
[[method]]
id = "blaker"
[[method]]
id = "jeffreys"
boundary = false
label = "jeffreys <plain> & co"
[output]
cube = "exact.h5"
tables = ""
"""

MODELS = """title = "Report check: a lot of 90 and the endless binomial"
[grid]
n = [5, 12, 30]
p = { from = 0.02, to = 0.98, count = 49 }
levels = [0.95]
sides = ["two-sided", "upper-bound"]
[[method]]
id = "wald"
[[method]]
id = "fpc-wilson"
[[method]]
id = "exact-hypergeometric"
[[model]]
kind = "binomial"
[[model]]
kind = "hypergeometric"
population = 90
[output]
cube = "models.h5"
tables = ""
"""


def check_model_panel(cube_path, html_path):
    """The models panel: per side and level, each method's worst coverage
    (min over n of inf_coverage) and mean coverage (mean over n of
    mean_coverage_continuous) under each model, equal to the cube's."""
    page = open(html_path, encoding="utf-8").read()
    root = ET.fromstring(page.split("\n", 1)[1])
    cells = 0
    with h5py.File(cube_path, "r") as f:
        models = [text(v) for v in f["summary/model"][()]]
        sides = [text(v) for v in f["summary/side"][()]]
        levels = list(f["summary/level"][()])
        methods = [text(v) for v in f["summary/method"][()]]
        assert [text(f["models/" + m].attrs["kind"]) for m in models] == ["binomial", "hypergeometric"]
        sec = [s for s in root.iter(XH + "section") if s.get("id") == "models"]
        assert len(sec) == 1, "no models panel"
        for table in sec[0].iter(XH + "table"):
            s = sides.index(table.get("data-side"))
            l = levels.index(float(table.get("data-level")))
            for tr in table.iter(XH + "tr"):
                row = list(tr)
                if row[0].tag == XH + "th":
                    continue
                m = methods.index(row[0].text)
                for mo in range(len(models)):
                    worst = np.min(f["summary/inf_coverage"][mo, s, l, m, :])
                    mean = np.mean(f["summary/mean_coverage_continuous"][mo, s, l, m, :])
                    assert same(float(row[1 + 2 * mo].get("data-value")), worst), (models[mo], methods[m])
                    assert abs(float(row[2 + 2 * mo].get("data-value")) - mean) <= 1e-12, (models[mo], methods[m])
                    cells += 2
    assert cells == 2 * 2 * 3 * 2, cells
    return cells


SIMULATED = """title = "Report check: simulated only"
seed = 5150
[grid]
n = [6, 15, 30]
p = { from = 0.04, to = 0.96, count = 24 }
levels = [0.95]
[evaluate]
exact = false
replicates = 3000
[[method]]
id = "wald"
[[method]]
id = "wilson"
[output]
cube = "simulated.h5"
tables = ""
"""


def text(v):
    return v.decode() if isinstance(v, bytes) else str(v)


def floats(s):
    return [float(w) for w in s.split()]


def same(a, b):
    """Bit-equal doubles (NaN equals NaN)."""
    return np.float64(a).tobytes() == np.float64(b).tobytes()


def reaches(value, level, edge, slack):
    """A heat-map bin reaches a class edge: at or below nominal by the shared
    coverage rule (value >= nominal + edge - slack), above it by the plain deviation."""
    if np.isinf(edge):
        return edge < 0
    return value >= level + edge - slack if edge <= 0 else value - level >= edge


def box(el):
    return [float(v) for v in el.get("data-box").split()]


def overlap(a, b):
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def check_tradeoff(svg_el, methods, levels, level_of_section):
    """Trade-off labels: each label's box (data-box, the writer's estimate) holds the text as
    FreeType measures it in DejaVu Sans (PIL, python3-pil 9.4.0 on Debian 12), lies inside the
    viewBox, and overlaps no other label, no point marker and not the nominal line's label;
    far-off points sit in the strip under a broken axis; hollow and filled points follow the
    shared coverage rule (slack 1e-10)."""
    view = [float(v) for v in svg_el.get("viewBox").split()]
    view = [view[0], view[1], view[0] + view[2], view[1] + view[3]]
    labels = [t for t in svg_el.iter(SV + "text") if t.get("class") == "point-label"]
    nominal = [t for t in svg_el.iter(SV + "text") if t.get("class") == "nominal-label"]
    points = [c for c in svg_el.iter(SV + "circle") if c.get("class") == "point"]
    assert len(labels) == len(points) and len(nominal) == 1
    markers = []
    for c in points:
        cx, cy, r = float(c.get("cx")), float(c.get("cy")), float(c.get("r"))
        markers.append([cx - r, cy - r, cx + r, cy + r])
    boxes = [box(t) for t in labels]
    nb = box(nominal[0])
    for t, b in zip(labels + nominal, boxes + [nb]):
        assert view[0] <= b[0] and b[2] <= view[2] and view[1] <= b[1] and b[3] <= view[3], ("outside", b)
        if FONT is not None:
            measured = FONT.getlength("".join(t.itertext()))
            assert measured <= b[2] - b[0] + 0.2, (t.text, measured, b)
            x = float(t.get("x"))  # the anchor lies within the box, a bearing allowance from its edge
            edge = b[0] if t.get("text-anchor") != "end" else b[2]
            assert abs(edge - x) <= 0.15 * 11 + 0.1, (t.text, x, b)
    for i, b in enumerate(boxes):
        assert not overlap(b, nb), labels[i].text
        for j, other in enumerate(boxes):
            assert i == j or not overlap(b, other), (labels[i].text, labels[j].text)
        for m in markers:
            assert not overlap(b, m), (labels[i].text, m)
    level = level_of_section
    breaks = [g for g in svg_el.iter(SV + "g") if g.get("class") == "axis-break"]
    threshold = level - 4 * (1 - level)
    far = [c for c in points if not float(c.get("data-y")) >= threshold - 1e-10]
    assert len(breaks) == (1 if far and len(far) < len(points) else 0)
    for c in points:
        y = float(c.get("data-y"))
        assert c.get("data-meets-nominal") == ("yes" if y >= level - 1e-10 else "no")
        if breaks:
            assert c.get("data-panel") == ("strip" if c in far else "main")
    return len(labels)


try:
    from PIL import ImageFont
    FONT = ImageFont.truetype("/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf", 11)
except (ImportError, OSError):
    FONT = None


def run_case(name, scenario, report_args):
    path = os.path.join(work, name + ".toml")
    with open(path, "w") as f:
        f.write(scenario)
    cube = os.path.join(work, name + ".h5")
    html = os.path.join(work, name + ".html")
    for old in (cube, html):
        if os.path.exists(old):
            os.remove(old)
    subprocess.run([exe, "run", path, "--quiet"], check=True, stdout=subprocess.DEVNULL)
    subprocess.run([exe, "report", cube, "-o", html] + report_args, check=True, stdout=subprocess.DEVNULL)
    return cube, html


def check_self_contained(page, root):
    assert page.startswith("<!DOCTYPE html>\n"), "no HTML5 doctype"
    assert root.tag == XH + "html", root.tag
    for el in root.iter():
        tag = el.tag.split("}")[-1]
        assert tag not in ("script", "iframe", "object", "embed", "img", "link", "image", "use"), tag
        for k, v in el.attrib.items():
            key = k.split("}")[-1]
            assert key != "src", f"src= on <{tag}>"
            if key == "href":
                assert v.startswith("#"), f"href to {v!r}"
            assert not key.startswith("on"), f"event handler {key} on <{tag}>"
            assert "url(" not in v, f"url( in {key} of <{tag}>"
    for style in root.iter(XH + "style"):
        css = style.text or ""
        assert "@import" not in css
        for m in re.finditer(r"url\(\s*['\"]?([^'\")]*)", css):
            assert m.group(1).startswith("data:"), m.group(0)
    assert not re.search(r"https?://(?!www\.w3\.org/(1999/xhtml|2000/svg))", page), "an http(s) address"


def check_case(cube_path, html_path, expect_source, max_bins):
    page = open(html_path, encoding="utf-8").read()
    root = ET.fromstring(page.split("\n", 1)[1])  # the doctype line is not XML
    check_self_contained(page, root)
    counts = {"series": 0, "heat rows": 0, "points": 0, "table cells": 0}
    with h5py.File(cube_path, "r") as f:
        source = "exact" if "exact" in f else "mc"
        assert source == expect_source
        axes = {k: f[source + "/" + k][()] for k in ("model", "side", "level", "method", "n", "p")}
        models = [text(v) for v in axes["model"]]
        sides = [text(v) for v in axes["side"]]
        methods = [text(v) for v in axes["method"]]
        levels, ns, ps = list(axes["level"]), list(axes["n"]), axes["p"]

        # Provenance: the cube file's SHA-256, the axes, seed and versions.
        sha = hashlib.sha256(open(cube_path, "rb").read()).hexdigest()
        body = "".join(root.itertext())
        assert sha in body, "cube SHA-256 not on the page"
        for attr in ("seed", "tool_version", "created_utc", "scenario_sha256"):
            assert text(f.attrs[attr]) in body, attr
        p_axis = root.find(f".//{XH}td[@id='p-axis']")
        assert [float(v) for v in p_axis.get("data-p").split()] == list(ps)
        n_axis = root.find(f".//{XH}td[@id='n-axis']")
        assert [int(float(v)) for v in n_axis.get("data-n").split()] == list(ns)

        # Every method in the methods table; every axis title.
        listed = {"".join(c.itertext()) for c in root.iter(XH + "code")}
        for m in methods:
            assert m in listed, f"method {m} not listed"
        titles = {"".join(t.itertext()) for t in root.iter(SV + "text") if t.get("class") == "axis-title"}
        for want in ("p", "n", "coverage", "expected width E[U − L]",
                     "mean width (average over n of the grid mean)"):
            assert want in titles, f"axis title {want!r} missing ({titles})"
        assert any(t.startswith("worst-case coverage") for t in titles)

        def where(el):
            return (models.index(el.get("data-model")), sides.index(el.get("data-side")),
                    [i for i, l in enumerate(levels) if same(l, float(el.get("data-level")))][0],
                    methods.index(el.get("data-method")))

        # Curves: the cube's values at the drawn p, in p order.
        drawn_methods = set()
        for el in root.iter(SV + "polyline"):
            if el.get("class") != "series":
                continue
            assert el.get("data-source") == source
            mo, s, l, m = where(el)
            ni = ns.index(int(el.get("data-n")))
            idx = [int(v) for v in el.get("data-p-index").split()]
            assert idx == sorted(idx) and len(set(idx)) == len(idx)
            row = f[f"{source}/{el.get('data-kind')}"][mo, s, l, m, ni, :]
            got = floats(el.get("data-values"))
            assert len(got) == len(idx) == len(el.get("points").split())
            for i, v in zip(idx, got):
                assert same(v, row[i]), (el.get("data-method"), el.get("data-n"), ps[i], v, row[i])
            # A finite population's curve is drawn at the K/N its model
            # evaluated (/models/<label>/p_attained), not at the grid's p: on
            # the models case's linear p axis an affine image of them within
            # the coordinates. rounding (0.1 px each; the grid p would miss by px).
            key = f"models/{models[mo]}/p_attained"
            xs = [float(pt.split(",")[0]) for pt in el.get("points").split()]
            at = f[key][:] if key in f else None
            if at is not None and len(idx) > 2 and at[idx[-1]] > at[idx[0]]:
                slope = (xs[-1] - xs[0]) / (at[idx[-1]] - at[idx[0]])
                for i, x in zip(idx, xs):
                    assert abs(xs[0] + slope * (at[i] - at[idx[0]]) - x) < 0.25, (models[mo], ps[i], at[i], x)
            if source == "mc" and el.get("data-kind") == "coverage":
                se = f["mc/coverage_se"][mo, s, l, m, ni, :]
                for i, v in zip(idx, floats(el.get("data-se"))):
                    assert same(v, se[i])
            drawn_methods.add(el.get("data-method"))
            counts["series"] += 1
        assert drawn_methods == set(methods), drawn_methods

        # Heat maps: each bin the minimum over its cells; each run of bins in its colour class.
        classes = {}
        slack = None
        for el in root.iter():
            cls = el.get("class") or ""
            if cls == "heat-legend":
                slack = float(el.get("data-slack"))
                assert slack == 1e-10, slack
            if cls.startswith("heat-key") and el.get("data-lo") is not None:
                classes[cls.split()[1]] = (float(el.get("data-lo")), float(el.get("data-hi")))
            if cls != "heat-map":
                continue
            assert len(classes) == 8
            mo, s, l, m = where(el)
            level = levels[l]
            cov = f[f"{source}/coverage"][mo, s, l, m, :, :]
            bins = [tuple(float(x) for x in b.split(":")) for b in el.get("data-p-bins").split()]
            assert len(bins) <= max_bins
            p_index = {float(v): i for i, v in enumerate(ps)}
            rows = [r for r in el if r.get("class") == "heat-row"]
            assert 0 < len(rows) <= max_bins
            covered_n = []
            for r in rows:
                lo_n, hi_n = (int(float(v)) for v in r.get("data-n-range").split())
                i0, i1 = ns.index(lo_n), ns.index(hi_n)
                covered_n.extend(range(i0, i1 + 1))
                values = floats(r.get("data-values"))
                assert len(values) == len(bins)
                covered_p = []
                for b, (p0, p1) in enumerate(bins):
                    j0, j1 = p_index[p0], p_index[p1]
                    covered_p.extend(range(j0, j1 + 1))
                    assert same(values[b], np.min(cov[i0:i1 + 1, j0:j1 + 1])), (r.get("data-n-range"), b)
                assert covered_p == list(range(len(ps))), "p bins do not tile the axis"
                for rect in r:
                    a, e = (int(v) for v in rect.get("data-bins").split())
                    lo, hi = classes[rect.get("class")]
                    for b in range(a, e + 1):
                        assert reaches(values[b], level, lo, slack), (values[b], level, rect.get("class"))
                        assert not reaches(values[b], level, hi, slack), (values[b], level, rect.get("class"))
                counts["heat rows"] += 1
            assert covered_n == list(range(len(ns))), "n bins do not tile the axis"

        # Trade-off points: the ranking's mean width and worst coverage over n (sequential sums, as covergrid).
        worst_stat = "summary/inf_coverage" if source == "exact" else "summary/mc_min_coverage"
        width_stat = "summary/mean_width" if source == "exact" else "summary/mc_mean_width"
        for el in root.iter(SV + "circle"):
            if el.get("class") != "point":
                continue
            section = [sec for sec in root.iter(XH + "section") if el in list(sec.iter())][0]
            mo, s, l = (int(v) for v in section.get("id")[1:].split("-"))
            m = methods.index(el.get("data-method"))
            worst = f[worst_stat][mo, s, l, m, :]
            widths = f[width_stat][mo, s, l, m, :]
            total = 0.0
            for w in widths:
                total += float(w)
            assert same(float(el.get("data-y")), np.min(worst))
            assert same(float(el.get("data-x")), total / len(widths))
            counts["points"] += 1
        counts["labels"] = 0
        for sec in root.iter(XH + "section"):
            if sec.get("class") != "combo":
                continue
            l = int(sec.get("id")[1:].split("-")[2])
            for el in sec.iter(SV + "svg"):
                if el.get("class") == "tradeoff":
                    counts["labels"] += check_tradeoff(el, methods, levels, float(levels[l]))
        # Coverage panels: plot areas of at least 300 x 220 pixels, no wider than the page.
        for el in root.iter(SV + "svg"):
            if el.get("class") == "plot-area" and el.get("data-kind") == "coverage":
                assert float(el.get("width")) >= 300 and float(el.get("height")) >= 220, el.attrib
            if el.get("class") == "coverage-panels":
                assert float(el.get("width")) <= 1120

        # Summary table: mean coverage and min coverage at the drawn n are the cube's summaries.
        prefix = "" if source == "exact" else "mc_"
        for sec in root.iter(XH + "section"):
            if sec.get("class") != "combo":
                continue
            mo, s, l = (int(v) for v in sec.get("id")[1:].split("-"))
            table = [t for t in sec.iter(XH + "table") if t.get("class") == "summary"]
            if not table:
                continue
            for tr in table[0].iter(XH + "tr"):
                cells = list(tr)
                if cells[0].tag == XH + "th":
                    continue
                m, ni = methods.index(cells[0].text), ns.index(int(cells[1].text))
                for col, stat in ((2, "mean_coverage"), (3, "min_coverage")):
                    want = f[f"summary/{prefix}{stat}"][mo, s, l, m, ni]
                    assert same(float(cells[col].get("data-value")), want), (stat, cells[0].text)
                    counts["table cells"] += 1
    return counts


if __name__ == "__main__":
    cube, html = run_case("exact", EXACT, ["--max-bins", "10"])
    c1 = check_case(cube, html, "exact", 10)
    page = open(html, encoding="utf-8").read()
    assert "The vertical axis is broken" in page, "no broken axis for wald"
    assert "Left out: blaker does not define the lower-bound side" in page
    assert "p axis is in log-odds" in page
    cube, html = run_case("models", MODELS, [])
    c3 = check_case(cube, html, "exact", 80)
    panel = check_model_panel(cube, html)
    cube, html = run_case("simulated", SIMULATED, [])
    c2 = check_case(cube, html, "mc", 80)
    assert "Simulated: every figure" in open(html, encoding="utf-8").read()
    print(f"h5py {h5py.__version__}, numpy {np.__version__}, FreeType widths {FONT is not None}: exact report {c1}, two-model report {c3} and {panel} model-panel cells, simulated report {c2}: "
          "values equal the cube's, page self-contained")
