"""Tests of the HTML report (analyze.report.html_check and its SVG helpers).

What the checks are measured against:

- "html.parser": Python's standard-library HTML parser reads the page
  back; the structure we assert is what a browser or script would find.
- "Chromium": the page opened in headless Chromium (Debian package
  ``chromium``), the reference browser: the DOM it builds and the pixels it
  draws (tests marked ``browser``).
- "WCAG 2 luminance": relative luminance as defined in W3C WCAG 2.x
  (sRGB channels linearised, L = 0.2126 R + 0.7152 G + 0.0722 B), from
  memory; used to check that the colour scale is a lightness ramp.
- "hand calculation" / "hand reasoning": written out beside the check.

Data: cells of the demo library (sample_layouts, the invented dsk18
process) extracted and analysed by the project's own pipeline, and
circuits edited by hand (renamed nets, removed wiring).
"""

from __future__ import annotations

import dataclasses
import html
import os
import re
import types
from html.parser import HTMLParser
from pathlib import Path

import pytest
from shapely.geometry import box

from analyze.search.analysis import analyse_circuit
from analyze.compare.comparison import StageComparison, compare_circuits
from analyze.report.html_check import check_html, compare_html
from analyze.report.svg_layout import cap_bins, cap_ramp, layout_svg
from analyze.report.svg_plots import pattern_plot_svg
from extract.circuit import CapParts, Circuit, Net
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech
from sample_layouts.make_samples import write_library

import browser

ROOT = Path(__file__).resolve().parents[3]
ARTIFACTS = ROOT / "tests" / "artifacts"
CELLS = ["DYN_NAND3", "DOMINO_MUX4", "PDYN_NOR2"]


class Page(HTMLParser):
    """Every start tag with its attributes, and the text inside each tag."""

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.stack: list[tuple[str, dict, list]] = []
        self.texts: list[tuple[str, dict, str]] = []
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag not in ("path", "rect", "line", "circle", "polyline", "meta", "br"):
            self.stack.append((tag, a, []))

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        while self.stack:
            t, a, buf = self.stack.pop()
            text = "".join(buf)
            self.texts.append((t, a, text))
            if self.stack:
                self.stack[-1][2].append(text)
            if t == tag:
                break

    def handle_data(self, data):
        if self.stack:
            self.stack[-1][2].append(data)

    def find(self, tag: str, **attrs) -> list[dict]:
        return [a for t, a in self.tags if t == tag and all(
            (v in (a.get(k.rstrip("_")) or "").split()) if k == "class_" else a.get(k) == v
            for k, v in attrs.items())]

    def text_of(self, tag: str, **attrs) -> list[str]:
        return [txt for t, a, txt in self.texts if t == tag and all(a.get(k) == v for k, v in attrs.items())]


@pytest.fixture(scope="module")
def tech():
    return load_tech(str(ROOT / "sample_layouts" / "dsk18.toml"))


@pytest.fixture(scope="module")
def gds(tmp_path_factory):
    return write_library(str(tmp_path_factory.mktemp("cells") / "cells.gds"), CELLS)


@pytest.fixture(scope="module")
def checked(gds, tech):
    """cell -> (circuit, tech, recognition, results); DOMINO_MUX4 with a guard
    of 0.5 V so that it fails and gets flags."""
    out = {}
    for cell in CELLS:
        t = dataclasses.replace(tech, guard=0.5) if cell == "DOMINO_MUX4" else tech
        c = extract_layout(gds, t, cell)
        rec, res = analyse_circuit(c, t)
        out[cell] = (c, t, rec, res)
    return out


def _net_groups(page: Page) -> list[dict]:
    return [a for t, a in page.tags if t == "g" and "data-net" in a]


# --------------------------------------------------------------- structure


@pytest.mark.parametrize("cell", CELLS)
def test_one_shape_element_per_net(checked, cell):
    # html.parser: the layout SVG holds exactly one <g data-net> per net
    # that has geometry, and no other element claims a net.
    c, t, rec, res = checked[cell]
    page = Page(check_html(c, t, rec, res))
    names = [a["data-net"] for a in _net_groups(page)]
    assert sorted(names) == sorted(n for n, s in c.shapes.items() if s)
    assert len(names) == len(set(names))
    assert len(page.find("svg", class_="layout")) == 1
    # every drawn polygon of the net is in its group: one <path> per layer used
    paths = [a for a in page.find("path") if "data-layer" in a]
    assert len(paths) == sum(len({lay for lay, _ in s}) for s in c.shapes.values() if s)


def test_hover_text_names_net_and_parts(checked):
    # html.parser: each net group's <title> starts with the net's name and its
    # total capacitance, then lists the non-zero parts (hand reasoning: the
    # parts add up to the total, CapParts.total).
    c, t, rec, res = checked["DYN_NAND3"]
    page = Page(check_html(c, t, rec, res))
    titles = {}
    for tag, a, text in page.texts:
        if tag == "g" and "data-net" in a:
            titles[a["data-net"]] = text
    for name, net in c.nets.items():
        if not c.shapes.get(name):
            continue
        text = titles[name]
        assert text.startswith(f"{name} ({net.role}): {net.cap_ff:.3f} fF")
        parts = re.findall(r"^([a-z ]+): ([0-9.]+) fF$", text, re.M)
        assert abs(sum(float(v) for _, v in parts) - net.cap_ff) < 4e-3


@pytest.mark.parametrize("cell", CELLS)
def test_tables_present(checked, cell):
    # html.parser: a summary row per stage, and per stage a section with the
    # property table, the shared-node table (dynamic node + shared nodes),
    # the verdict as a word plus a symbol, and the pattern plot.
    c, t, rec, res = checked[cell]
    text = check_html(c, t, rec, res)
    page = Page(text)
    assert len(res) == 1
    r = res[0]
    assert text.count('<table class="summary">') == 1
    assert text.count('<section class="stage"') == len(res)
    caps = re.search(r'<table class="caps">.*?</table>', text, re.S).group(0)
    assert caps.count("<tr>") == 1 + 1 + len(r.worst_case.shared_nodes)  # header + dynamic + shared
    for node in [r.stage.dynamic_node, *r.worst_case.shared_nodes]:
        assert f"<td>{node}</td>" in caps
    word = "✓ PASS" if r.status == "pass" else "✗ FAIL"
    assert page.text_of("td", **{"class": f"status {r.status}"})[0] == word
    assert f"{r.margin_v:+.3f} V" in text
    assert f"{r.worst_case.v_final:.3f} V" in text and f"{r.worst_case.v_final_linear:.3f} V" in text
    assert len(page.find("svg", class_="patterns")) == 1


def test_failing_stage_flags_and_outlines(checked):
    # html.parser: a failing stage lists its flagged nodes with locations; in
    # the drawing the dynamic node has a solid outline, flagged nodes a dashed
    # one, shared nodes a dotted one (stroke patterns, not colour).
    c, t, rec, res = checked["DOMINO_MUX4"]
    r = res[0]
    assert r.status == "fail" and r.flags
    text = check_html(c, t, rec, res)
    page = Page(text)
    flags = re.search(r'<table class="flags">.*?</table>', text, re.S).group(0)
    assert flags.count("<tr>") == 1 + len(r.flags)
    for f in r.flags:
        assert f"({f.location_um[0]:.3f}, {f.location_um[1]:.3f}) µm" in flags
    groups = {a["data-net"]: a for a in _net_groups(page)}
    dyn = groups[r.stage.dynamic_node]
    assert "mark-dynamic" in dyn["class"].split() and dyn["stroke-dasharray"] == "none"
    for f in r.flags:
        assert "mark-flag" in groups[f.node]["class"].split()
    dashes = {groups[f.node]["stroke-dasharray"] for f in r.flags}
    shared = [n for n in r.worst_case.shared_nodes if n not in {f.node for f in r.flags}]
    assert shared, "hand reasoning: MUX4's worst case shares 4 nodes, fewer are flagged"
    dots = {groups[n]["stroke-dasharray"] for n in shared}
    assert len(dashes | dots | {"none"}) == 3  # three distinct stroke patterns
    labels = {a["data-label-for"] for a in page.find("g", class_="label")}
    assert labels == {r.stage.dynamic_node} | {f.node for f in r.flags}


def test_hostile_names_are_escaped(checked, tech):
    # html.parser: net names full of markup come back verbatim as attribute
    # values and text, and the page has no element they could have injected.
    c, _, _, _ = checked["DYN_NAND3"]
    evil = {"X": '<script>alert("x")</script>', "net2": "a&b\"'<i>", "A": "</svg><b>"}
    hc = _renamed(c, evil)
    rec, res = analyse_circuit(hc, tech)
    assert res and res[0].stage.dynamic_node == evil["X"]
    text = check_html(hc, tech, rec, res)
    page = Page(text)
    assert not page.find("script") and not page.find("i") and not page.find("b")
    names = {a["data-net"] for a in _net_groups(page)}
    assert set(evil.values()) <= names
    assert "<script>" not in text and "</svg><b>" not in text


def test_deterministic(checked):
    # hand reasoning: nothing in the page depends on time or hash order.
    c, t, rec, res = checked["DOMINO_MUX4"]
    assert check_html(c, t, rec, res) == check_html(c, t, rec, res)


def test_no_external_resources(checked):
    # html.parser: nothing to fetch — no script, link, img, iframe, and no
    # url() other than the page's own #fragment patterns.
    c, t, rec, res = checked["DOMINO_MUX4"]
    text = check_html(c, t, rec, res)
    page = Page(text)
    for tag in ("script", "link", "img", "iframe", "object", "embed"):
        assert not page.find(tag)
    assert set(re.findall(r"url\(([^)]*)\)", text)) == {u for u in re.findall(r"url\((#[^)]*)\)", text)}
    assert not re.search(r"(src|href)=\"(?!#)", text)


# ---------------------------------------------------------- drawing details


def test_y_axis_flipped_and_nm_coordinates():
    # hand calculation: a 1 µm × 2 µm box at the origin becomes the ring
    # (0,0) (1000,0) (1000,-2000) (0,-2000) in nm with y negated; the
    # viewBox pads the larger side (2000 nm) by 4 % = 80 nm each way:
    # x from -80, y from -2080, width 1000 + 160, height 2000 + 160.
    c = Circuit("T", {"A": Net("A", cap=CapParts(wire=1.0))}, [], shapes={"A": [("poly", box(0, 0, 1, 2))]})
    svg, _, _ = layout_svg(c)
    d = Page(svg).find("path", **{"data-layer": "poly"})[0]["d"]
    pts = {tuple(map(int, p)) for p in re.findall(r"(-?\d+) (-?\d+)", d)}
    assert pts == {(0, 0), (1000, 0), (1000, -2000), (0, -2000)}
    assert Page(svg).find("svg")[0]["viewbox"] == "-80 -2080 1160 2160"


def test_layers_in_process_order(checked):
    # hand reasoning: diffusion first, then poly, then metals in tech-file
    # order, inside each net; nets whose top layer is metal come after nets
    # without metal, so metal lies on top.
    c, t, rec, res = checked["DYN_NAND3"]
    page = Page(check_html(c, t, rec, res))
    rank = {"active": 0, "poly": 1, "metal1": 2, "metal2": 3}
    layers = [(a.get("data-layer")) for tg, a in page.tags if tg == "path" and "data-layer" in a]
    seq, current = [], []
    for tg, a in page.tags:
        if tg == "g" and "data-net" in a:
            current = []
            seq.append(current)
        elif tg == "path" and "data-layer" in a:
            current.append(rank[a["data-layer"]])
    assert all(s == sorted(s) for s in seq)
    tops = [max(s) for s in seq]
    assert tops == sorted(tops)
    assert len(layers) == sum(len(s) for s in seq)


def _luminance(hex_colour: str) -> float:
    # WCAG 2 relative luminance (W3C definition, from memory)
    def lin(c):
        c /= 255
        return c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)


@pytest.mark.parametrize("n", [1, 2, 5, 7, 12])
def test_colour_ramp_is_a_lightness_ramp(n):
    # WCAG 2 luminance: strictly falling from the first colour to the last,
    # and the ends far apart (contrast ratio (L1+0.05)/(L2+0.05) > 7 for n > 1,
    # the WCAG AAA level for text, so the ramp survives greyscale print).
    lum = [_luminance(c) for c in cap_ramp(n)]
    assert all(a > b for a, b in zip(lum, lum[1:]))
    if n > 1:
        assert (lum[0] + 0.05) / (lum[-1] + 0.05) > 7


def test_net_colours_follow_capacitance(checked):
    # WCAG 2 luminance: among signal nets, more capacitance never means a
    # lighter fill; power and ground are drawn with the neutral rail pattern.
    c, t, rec, res = checked["DOMINO_MUX4"]
    page = Page(check_html(c, t, rec, res))
    fills = {}
    current = None
    for tg, a in page.tags:
        if tg == "g" and "data-net" in a:
            current = a["data-net"]
        elif tg == "path" and "data-layer" in a and not a["fill"].startswith("url(#h"):
            fills.setdefault(current, a["fill"])
    for name in ("VDD", "VSS"):
        assert fills.get(name, "url(#rail)") == "url(#rail)"
    sig = sorted((c.nets[n].cap_ff, _luminance(f)) for n, f in fills.items() if f.startswith("#"))
    assert len(sig) >= 5
    assert all(l1 >= l2 for (_, l1), (_, l2) in zip(sig, sig[1:]))


def test_legend_bins_hand_calculation(checked):
    # hand calculation: MUX4 signal caps top out at X = 10.317 fF; 10.317/7 =
    # 1.47 rounds up to the step 2 fF, so the legend reads 0–2 … 10–12 fF.
    c, t, rec, res = checked["DOMINO_MUX4"]
    top = max(n.cap_ff for k, n in c.nets.items() if n.role not in ("power", "ground") and c.shapes.get(k))
    assert 10.0 < top < 12.0
    assert cap_bins([top]) == [0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 12.0]
    text = check_html(c, t, rec, res)
    for lo, hi in zip(range(0, 12, 2), range(2, 13, 2)):
        assert f"{lo}–{hi} fF" in text


def test_large_cell_draws_only_stage_nets(checked):
    # hand reasoning: with a cap below the cell's shape count, only the nets
    # of the stage (dynamic node, internal nodes, footer node, flags) are
    # drawn, and the page says so.
    c, t, rec, res = checked["DOMINO_MUX4"]
    total = sum(len(s) for s in c.shapes.values())
    st = res[0].stage
    wanted = {st.dynamic_node, st.footer_node, *st.internal_nodes}
    text = check_html(c, t, rec, res, max_shapes=total - 1)
    names = {a["data-net"] for a in _net_groups(Page(text))}
    assert names == wanted
    assert f"The cell has {total} shapes" in text


# ------------------------------------------------------------ pattern plot


def test_pattern_plot_all_patterns_worst_first(checked):
    # hand reasoning: DYN_NAND3 is a 3-high series stack A-B-C; a pattern
    # counts unless all three conduct, so 2**3 - 1 = 7 bars.  The first bar
    # is the worst case (lowest v_final).
    c, t, rec, res = checked["DYN_NAND3"]
    r = res[0]
    text = check_html(c, t, rec, res)
    plot = re.search(r'<svg class="patterns".*?</svg>', text, re.S).group(0)
    bars = re.findall(r'<rect class="bar (pass|fail)"[^>]*><title>([^<]*)</title>', plot)
    assert len(bars) == 7 == r.counted_patterns
    assert bars[0][1].startswith("A=1 B=1 C=0") and f"v_final {r.worst_case.v_final:.3f} V" in bars[0][1]
    v = [float(re.search(r"v_final ([0-9.]+) V", b[1]).group(1)) for b in bars]
    assert v == sorted(v)
    assert "Only" not in plot


def test_pattern_plot_capped_says_so(checked):
    # hand reasoning: 3 patterns asked for out of 7 -> 3 bars, plus the worst
    # case when the first three in search order do not hold it; the caption
    # says how many of how many are drawn.
    c, t, rec, res = checked["DYN_NAND3"]
    text = check_html(c, t, rec, res, max_patterns=3)
    plot = re.search(r'<svg class="patterns".*?</svg>', text, re.S).group(0)
    n = plot.count('<rect class="bar ')
    assert n in (3, 4)
    assert "Only 3 of 7 counted patterns are drawn" in plot
    assert "A=1 B=1 C=0" in plot


def test_pattern_plot_required_level_hand_calculation():
    # hand calculation: n-type, threshold 0.8 V, guard 0.1 V: a pattern fails
    # below 0.9 V -> 0.85 fails, 0.9 and 1.2 pass.  p-type mirror, threshold
    # 0.8 V, guard 0.1 V: fails above 0.7 V -> 0.75 fails, 0.3 and 0.7 pass,
    # and the highest voltage is drawn first.
    svg = pattern_plot_svg([(1.2, "a"), (0.85, "b"), (0.9, "c")], threshold_v=0.8, guard_v=0.1, vdd=1.8)
    classes = re.findall(r'class="bar (\w+)"[^>]*><title>(\w)', svg)
    assert classes == [("fail", "b"), ("pass", "c"), ("pass", "a")]
    svg = pattern_plot_svg([(0.3, "a"), (0.75, "b"), (0.7, "c")], threshold_v=0.8, guard_v=0.1, vdd=1.8,
                           polarity="p")
    classes = re.findall(r'class="bar (\w+)"[^>]*><title>(\w)', svg)
    assert classes == [("fail", "b"), ("pass", "c"), ("pass", "a")]
    assert 'class="required"' in svg and "required 0.700 V" in svg


def test_p_type_wording(checked):
    # hand reasoning: a predischarged stage needs predischarge, not precharge.
    c, t, rec, res = checked["PDYN_NOR2"]
    text = check_html(c, t, rec, res)
    assert "p-type (predischarged low)" in text and "predischarge devices" in text
    assert "highest v_final first" in text


# ------------------------------------------------------------------ compare


def _renamed(c: Circuit, names: dict[str, str], strip_wire: bool = False, shapes: bool = True) -> Circuit:
    """The same circuit with nets renamed; optionally without wiring
    capacitance and geometry (as a schematic would be)."""
    m = lambda n: names.get(n, n)  # noqa: E731
    nets = {}
    for n, net in c.nets.items():
        cap = dataclasses.replace(net.cap, wire=0.0) if strip_wire else net.cap
        nets[m(n)] = dataclasses.replace(net, name=m(n), cap=cap)
    devs = [dataclasses.replace(d, drain=m(d.drain), gate=m(d.gate), source=m(d.source)) for d in c.devices]
    shp = {m(n): s for n, s in c.shapes.items()} if shapes else {}
    return Circuit(c.cell, dict(sorted(nets.items())), devs, list(c.findings), c.source, shp)


def _comparison(checked, tech, guard=None):
    """A comparison of DYN_NAND3 against a hand-made schematic: the same
    circuit with schematic-style names and no wiring capacitance or geometry."""
    post, _, _, _ = checked["DYN_NAND3"]
    t = tech if guard is None else dataclasses.replace(tech, guard=guard)
    to_s = {n: n.lower() + "_s" for n in post.nets if n not in ("VDD", "VSS", "CLK")}
    pre = _renamed(post, to_s, strip_wire=True, shapes=False)
    pre.source = "nand3.sp"
    match = types.SimpleNamespace(net_map={n: to_s.get(n, n) for n in post.nets}, notes=["hand-made schematic"])
    return compare_circuits(pre, post, match, t)


def test_compare_page(checked, tech):
    # hand reasoning: the "schematic" is the layout without wiring
    # capacitance, so post-layout nodes carry at least as much capacitance as
    # pre-layout ones, and the droop increase is post droop - pre droop.
    cmp = _comparison(checked, tech)
    sc = cmp.stages[0]
    text = compare_html(cmp)
    page = Page(text)
    inc = sc.post.worst_case.droop_v - sc.pre.worst_case.droop_v
    assert f"{inc:+.3f} V" in text
    charts = re.findall(r'<svg class="bars".*?</svg>', text, re.S)
    assert len(charts) == 2  # v_final per stage, node caps of the one stage
    assert charts[0].count('class="bar pre"') == 1 and charts[0].count('class="bar post"') == 1
    assert charts[0].count('class="mark"') == 1  # the threshold tick
    st = sc.post.stage
    assert charts[1].count('class="bar post"') == 1 + len(st.internal_nodes)
    nets = re.search(r'<table class="nets">.*?</table>', text, re.S).group(0)
    assert nets.count("<tr>") == 1 + len(cmp.nets) == 1 + len(cmp.post.nets)
    for name in [st.dynamic_node, *st.internal_nodes]:
        pre_c = cmp.pre.nets[cmp.net_map[name]].cap_ff
        post_c = cmp.post.nets[name].cap_ff
        assert post_c >= pre_c
        assert f"<td>{name}</td><td>{cmp.net_map[name]}</td>" in nets
    # hand reasoning: only wiring was removed, so "wire" is the part that grew on X
    row = re.search(rf"<tr><td>{st.dynamic_node}</td>.*?</tr>", nets).group(0)
    assert "<td>wire</td>" in row
    attribution = re.search(r'<table class="attribution">.*?</table>', text, re.S).group(0)
    assert attribution.count("<tr>") == 1 + len(sc.attribution)
    assert sorted(a["data-net"] for a in _net_groups(page)) == sorted(n for n, s in cmp.post.shapes.items() if s)
    assert "hand-made schematic" in text and "nand3.sp" in text


def test_compare_failing_layout_shows_fixes(checked, tech):
    # hand reasoning: with a guard of 0.65 V the layout (margin 0.639 V in the
    # demo process) fails; its flags appear in the stage section and are
    # outlined in the drawing.
    cmp = _comparison(checked, tech, guard=0.65)
    sc = cmp.stages[0]
    assert sc.post.status == "fail"
    text = compare_html(cmp)
    assert "✗ FAIL" in text
    if sc.post.flags:
        assert '<table class="flags">' in text
        groups = {a["data-net"]: a for a in _net_groups(Page(text))}
        assert all("mark-flag" in groups[f.node]["class"].split() for f in sc.post.flags)
    else:
        assert sc.post.flag_note and html.escape(sc.post.flag_note) in text


def test_compare_missing_stage(checked, tech):
    # hand reasoning: a stage only the layout has shows its post numbers and
    # a dash for pre, without failing.
    cmp = _comparison(checked, tech)
    cmp.stages = [StageComparison(cmp.stages[0].dynamic_node, None, cmp.stages[0].post)]
    text = compare_html(cmp)
    assert "no pre-layout value" in text and "no such stage" in text


# --------------------------------------------------------- real browser


def _write(tmp_path, name, text) -> str:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.mark.browser
def test_png_reader_against_chromium(tmp_path):
    # Chromium: a page of one known colour block; the decoded screenshot has
    # that exact colour inside the block and white outside it.
    browser.require_chromium()
    page = _write(tmp_path, "block.html", '<!DOCTYPE html><html><body style="margin:0;background:#ffffff">'
                  '<div style="width:200px;height:120px;background:#4f98cc"></div></body></html>')
    img = browser.read_png(browser.screenshot(page, str(tmp_path / "block.png"), size=(400, 300)))
    assert img.shape[:2] == (300, 400)
    assert tuple(img[60, 100, :3]) == (0x4F, 0x98, 0xCC)
    assert tuple(img[250, 350, :3]) == (255, 255, 255)


@pytest.mark.browser
def test_report_in_chromium(checked, tmp_path):
    # Chromium: the DOM it builds from the page still has the layout SVG with
    # one group per net and every table; its screenshot is not blank and
    # shows the colour of the dynamic node's capacitance bin and the black
    # FAIL cell.
    browser.require_chromium()
    c, t, rec, res = checked["DOMINO_MUX4"]
    text = check_html(c, t, rec, res)
    path = _write(tmp_path, "mux4.html", text)
    dom = Page(browser.dump_dom(path))
    src = Page(text)
    assert sorted(a["data-net"] for a in _net_groups(dom)) == sorted(n for n, s in c.shapes.items() if s)
    assert len(dom.find("table")) == len(src.find("table")) >= 5
    assert len(dom.find("svg", class_="layout")) == 1 and len(dom.find("svg", class_="patterns")) == 1
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    png = browser.screenshot(path, str(ARTIFACTS / "html_report_DOMINO_MUX4.png"), size=(1000, 1400))
    img = browser.read_png(png)[:, :, :3]
    assert img.reshape(-1, 3).std(axis=0).max() > 10, "blank page"
    colours = {tuple(p) for p in img.reshape(-1, 3)[::7].tolist()}
    signal = [n.cap_ff for k, n in c.nets.items() if n.role not in ("power", "ground") and c.shapes.get(k)]
    ramp = cap_ramp(len(cap_bins(signal)) - 1)
    assert c.nets[res[0].stage.dynamic_node].cap_ff == max(signal)  # so X is drawn in the darkest colour
    assert tuple(int(ramp[-1][i:i + 2], 16) for i in (1, 3, 5)) in colours
    assert (0x1D, 0x1D, 0x1D) in colours  # the FAIL cell
    assert os.path.getsize(png) > 10_000


# ------------------------------------------------------------- edge cases


def test_cell_without_stages(gds, tech, tmp_path):
    # hand reasoning: a static NAND2 has no clocked precharge device, so no
    # stage; the page says so, draws the layout and has no stage section.
    path = write_library(str(tmp_path / "static.gds"), ["STATIC_NAND2"])
    c = extract_layout(path, tech, "STATIC_NAND2")
    rec, res = analyse_circuit(c, tech)
    assert res == []
    text = check_html(c, tech, rec, res)
    assert "No dynamic stage found" in text and '<section class="stage"' not in text
    assert len(_net_groups(Page(text))) == len([n for n, s in c.shapes.items() if s])


def test_netlist_circuit_and_no_counted_pattern(checked):
    # hand-made data: the circuit without geometry (as read from a netlist)
    # and a result whose every pattern discharges the node (worst_case None,
    # 0 counted patterns): the page says there is nothing to draw and no
    # counted pattern, and has no pattern plot.
    from analyze.search.analysis import StageResult

    c, t, rec, res = checked["DYN_NAND3"]
    bare = _renamed(c, {}, shapes=False)
    r = StageResult(res[0].stage, threshold_v=0.9, margin_v=0.9, status="pass", worst_case=None, counted_patterns=0)
    text = check_html(bare, t, rec, [r])
    assert "No layout picture: this check read a netlist" in text and "No counted pattern" in text
    assert '<svg class="patterns"' not in text and not _net_groups(Page(text))


def test_compare_hostile_names_are_escaped(checked, tech):
    # html.parser: markup in layout and schematic net names comes back as
    # text, never as elements.
    post, _, _, _ = checked["DYN_NAND3"]
    evil = {"X": "<b>X</b>", "net2": "n&<i>"}
    post = _renamed(post, evil)
    pre = _renamed(post, {v: v + "<u>" for v in evil.values()}, shapes=False)
    match = types.SimpleNamespace(net_map={n: n + "<u>" if n in evil.values() else n for n in post.nets},
                                  notes=["<script>x</script>"])
    cmp = compare_circuits(pre, post, match, tech)
    assert cmp.stages and cmp.stages[0].dynamic_node == "<b>X</b>"
    page = Page(compare_html(cmp))
    for tag in ("b", "i", "u", "script"):
        assert not page.find(tag)
    assert "<b>X</b>" in {a["data-net"] for a in _net_groups(page)}
