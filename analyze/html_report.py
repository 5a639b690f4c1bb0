"""The HTML report designers look at: one self-contained page per run.

:func:`check_html` turns the results of ``dynshare check`` into a page
with the cell's layout coloured by net capacitance (dynamic, flagged and
shared nodes outlined and labelled), a summary of every stage, and per
stage its recognised parts, worst-case pattern, shared nodes with their
capacitances, the verdict, the nodes to fix and a plot of the final
voltage of every counted pattern.  :func:`compare_html` does the same for
pre-layout against post-layout (see :class:`Comparison`).

The page has no scripts and fetches nothing (inline CSS and SVG); every
name is escaped; the same input gives the same bytes.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field

from analyze.html_page import (fmt_loc, fmt_v, layout_figure, page, pattern_text, props_table, status_html,
                               table)
from analyze.svg_layout import MAX_SHAPES, Mark
from analyze.svg_plots import paired_bars_svg, pattern_plot_svg

__all__ = ["check_html", "compare_html", "Comparison", "StagePair", "MAX_PATTERNS", "MAX_DETAILED"]

#: At most this many patterns are plotted per stage.
MAX_PATTERNS = 256
#: At most this many stages get a detailed section (lowest margin first).
MAX_DETAILED = 100


def _kind(st) -> str:
    return "n-type (precharged high)" if st.polarity == "n" else "p-type (predischarged low)"


def _action(st) -> str:
    return "precharge" if st.polarity == "n" else "predischarge"


def _detailed(results, limit: int) -> list[int]:
    """Indices of the stages to describe in full: all, or the ``limit``
    lowest margins (failing first), kept in report order."""
    idx = list(range(len(results)))
    if len(idx) <= limit:
        return idx
    worst = sorted(idx, key=lambda i: (results[i].status != "fail", results[i].margin_v, i))[:limit]
    return sorted(worst)


def _marks(results, chosen) -> tuple[list[Mark], list[str]]:
    """Outlines and labels for the layout, and the nets to keep when capped."""
    marks, keep = [], []
    order = sorted(chosen, key=lambda i: (results[i].status != "fail", results[i].margin_v, i))
    for i in order:
        r = results[i]
        st = r.stage
        verdict = "PASS" if r.status == "pass" else "FAIL"
        marks.append(Mark(st.dynamic_node, "dynamic", f"{st.dynamic_node}: dynamic node, {verdict}", st.location_um))
        keep.append(st.dynamic_node)
        for f in r.flags:
            marks.append(Mark(f.node, "flag", f"{f.node}: add {_action(st)}", f.location_um))
            keep.append(f.node)
        if r.worst_case is not None:
            marks.extend(Mark(n, "shared", "") for n in r.worst_case.shared_nodes)
        keep.extend(st.internal_nodes)
        keep.extend(n for n in (st.footer_node,) if n)
    return marks, keep


def _summary(results, chosen) -> str:
    rows = []
    for i, r in enumerate(results):
        st = r.stage
        node = html.escape(st.dynamic_node)
        link = f'<td><a href="#stage-{i}">{node}</a></td>' if i in chosen else f"<td>{node}</td>"
        wc = r.worst_case
        rows.append([link, _kind(st), st.clock, "footed" if st.footed else "footless",
                     fmt_v(None if wc is None else wc.v_final), fmt_v(r.threshold_v), f"{r.margin_v:+.3f} V",
                     status_html(r.status), ", ".join(f.node for f in r.flags) or "–"])
    return table(["dynamic node", "type", "clock", "footer", "worst v_final", "threshold", "margin", "status",
                  "nodes to fix"], rows, cls="summary", raw_cols=(0, 7))


def _receiver_text(st, circuit) -> str:
    if not st.receivers:
        return "none found: threshold taken as VDD/2"
    return "; ".join(f"inverter {r.nmos}/{r.pmos} → {r.output}" for r in st.receivers)


def _cap_rows(circuit, st, names) -> list[list]:
    rows = []
    for name in names:
        net = circuit.nets.get(name)
        what = "dynamic node" if name == st.dynamic_node else (
            f"precharged by {st.secondary_precharge[name]}" if name in st.secondary_precharge else "internal")
        if net is None:
            rows.append([name, what, None, None, None, None, None])
            continue
        c = net.cap
        rows.append([name, what, c.total, c.junction, c.wire, c.gate + c.overlap, fmt_loc(net.location_um)])
    return rows


def _pattern_points(circuit, st, tech, result, constraints, max_patterns: int):
    """(v_final, hover text) for at most ``max_patterns`` counted patterns,
    always including the worst case, and a caption when capped."""
    from analyze.analysis import iter_counted_patterns

    pts, seen = [], set()
    for wc in iter_counted_patterns(circuit, st, tech, constraints, limit=max_patterns):
        key = tuple(sorted(wc.inputs.items()))
        seen.add(key)
        pts.append((wc.v_final, f"{pattern_text(wc.inputs)}; shared: {' '.join(wc.shared_nodes) or 'none'}"))
    caption = ""
    wc = result.worst_case
    if result.counted_patterns > len(pts):
        caption = (f"Only {len(pts)} of {result.counted_patterns} counted patterns are drawn (the first in search "
                   "order, plus the worst case).")
        if wc is not None and tuple(sorted(wc.inputs.items())) not in seen:
            pts.append((wc.v_final, f"{pattern_text(wc.inputs)} (worst case); shared: {' '.join(wc.shared_nodes)}"))
    return pts, caption


def _stage_section(i, r, circuit, tech, constraints, max_patterns) -> str:
    st = r.stage
    wc = r.worst_case
    out = [f'<section class="stage" id="stage-{i}"><h2>Stage {html.escape(st.dynamic_node)} '
           f'<span class="status {r.status}">{"✓ PASS" if r.status == "pass" else "✗ FAIL"}</span></h2>']
    sp = ", ".join(f"{n} by {d}" for n, d in sorted(st.secondary_precharge.items())) or "none"
    out.append(props_table([
        ("dynamic node", f"{st.dynamic_node} at {fmt_loc(st.location_um)}"),
        ("type", _kind(st)),
        ("clock", st.clock),
        (f"{_action(st)} devices", " ".join(st.precharge) or "–"),
        ("footer", f"{st.footer} (footer node {st.footer_node})" if st.footed else "none (footless)"),
        ("keepers", " ".join(st.keepers) or "none"),
        ("receiver", _receiver_text(st, circuit)),
        ("receiver threshold", f"{fmt_v(r.threshold_v)} (guard {tech.guard:g} V)"),
        ("inputs", " ".join(st.inputs) or "–"),
        (f"internal nodes {_action(st)}d", sp),
        ("counted patterns", f"{r.counted_patterns} (patterns that keep the dynamic node from the rail)"),
    ]))
    out.append("<h3>Worst case</h3>")
    if wc is None:
        out.append('<p class="note">No counted pattern: every allowed pattern evaluates the node; the margin is '
                   "taken with the dynamic node at its starting level.</p>")
    else:
        out.append(props_table([("worst pattern", pattern_text(wc.inputs)),
                                ("v_final", f"{fmt_v(wc.v_final)} (junction charge and pass limit)"),
                                ("v_final_linear", f"{fmt_v(wc.v_final_linear)} (zero-bias capacitances)"),
                                ("droop", fmt_v(wc.droop_v))]))
        out.append(table(["node", "part", "total fF", "junction fF", "wire fF", "gate + overlap fF", "location"],
                         _cap_rows(circuit, st, [st.dynamic_node] + list(wc.shared_nodes)), cls="caps"))
    out.append(f'<table class="props verdict"><tbody><tr><th>margin</th><td class="num">{r.margin_v:+.3f} V</td>'
               f"{status_html(r.status)}</tr></tbody></table>")
    if r.flags:
        out.append(f"<h3>Nodes that need a {_action(st)} device</h3>")
        out.append(table(["node", "action", "location", "between", "worst v_final after"],
                         [[f.node, f.action, fmt_loc(f.location_um), " and ".join(f.between) or "–",
                           fmt_v(f.v_final_after)] for f in r.flags], cls="flags"))
    elif r.flag_note:
        out.append(f'<p class="note">{html.escape(r.flag_note)}</p>')
    if r.counted_patterns:
        pts, caption = _pattern_points(circuit, st, tech, r, constraints, max_patterns)
        svg = pattern_plot_svg(pts, threshold_v=r.threshold_v, guard_v=tech.guard, vdd=tech.vdd,
                               polarity=st.polarity, caption=caption, pattern_id=f"s{i}")
        out.append(f"<figure>{svg}<figcaption>Final voltage of the dynamic node for each counted pattern. "
                   "Solid bars pass, hatched bars fail.</figcaption></figure>")
    out.append("</section>")
    return "\n".join(out)


def _findings(findings) -> str:
    if not findings:
        return ""
    items = "".join(f"<li>{html.escape(f.message)}" + (f" at {fmt_loc(f.location_um)}" if f.location_um else "")
                    + "</li>" for f in findings)
    return f"<h2>Warnings</h2><ul class=\"findings\">{items}</ul>"


def check_html(circuit, tech, recognition, results, *, constraints=None, max_patterns: int = MAX_PATTERNS,
               max_shapes: int = MAX_SHAPES, max_detailed: int = MAX_DETAILED) -> str:
    """The HTML report of ``dynshare check``.

    Parameters
    ----------
    circuit : extract.circuit.Circuit
    tech : extract.tech.Tech
    recognition : analyze.recognize.Recognition
    results : list of analyze.analysis.StageResult
        One per stage of ``recognition``.
    constraints : analyze.constraints.Constraints, optional
        The input constraints of the run (the pattern plot shows only the
        patterns they allow).
    max_patterns : int
        Patterns plotted per stage.
    max_shapes : int
        Above this many layout shapes only the stages' nets are drawn.
    max_detailed : int
        Stages described in full (the rest appear in the summary table).

    Returns
    -------
    str
        A complete HTML document.

    Notes
    -----
    Cost: one pass over the layout shapes plus, per detailed stage, at
    most ``max_patterns`` pattern evaluations
    (:func:`analyze.analysis.iter_counted_patterns`).
    """
    n = len(results)
    failed = sum(r.status == "fail" for r in results)
    chosen = _detailed(results, max_detailed)
    marks, keep = _marks(results, chosen)
    head = [f"<h1>Charge sharing in cell {html.escape(circuit.cell)}</h1>",
            f"<p>Process {html.escape(tech.name)}, VDD {tech.vdd:g} V, guard {tech.guard:g} V. "
            f"Layout <code>{html.escape(circuit.source or '–')}</code>: {len(circuit.devices)} transistors, "
            f"{len(circuit.nets)} nets.</p>"]
    if recognition.clock_note:
        head.append(f"<p>Clock: {html.escape(recognition.clock_note)}.</p>")
    if n == 0:
        head.append('<p class="verdict">No dynamic stage found in this cell.</p>')
    else:
        sym = "✓" if failed == 0 else "✗"
        head.append(f'<p class="verdict">{sym} {n - failed} of {n} stage{"s" if n != 1 else ""} pass'
                    f'{"" if failed == 0 else f", {failed} fail"}.</p>')
        head.append(_summary(results, set(chosen)))
    body = head + [_findings(list(circuit.findings) + list(recognition.findings)), "<h2>Layout</h2>",
                   layout_figure(circuit, tech, marks, keep, max_shapes)]
    if len(chosen) < n:
        body.append(f'<p class="note">{len(chosen)} of {n} stages (the lowest margins) are described below; '
                    "every stage is in the summary table.</p>")
    body += [_stage_section(i, results[i], circuit, tech, constraints, max_patterns) for i in chosen]
    return page(f"dynshare check: {circuit.cell}", "\n".join(body))


@dataclass
class StagePair:
    """One stage analysed before and after layout.

    Attributes
    ----------
    dynamic_node : str
        Layout name of the dynamic node.
    pre : analyze.analysis.StageResult or None
        The stage in the schematic circuit (schematic net names), None when
        the schematic has no such stage.
    post : analyze.analysis.StageResult or None
        The stage in the layout circuit, None when the layout has none.
    """

    dynamic_node: str
    pre: object | None
    post: object | None


@dataclass
class Comparison:
    """What :func:`compare_html` shows.

    Attributes
    ----------
    pre : extract.circuit.Circuit
        The schematic (pre-layout) circuit.
    post : extract.circuit.Circuit
        The layout (post-layout) circuit; its ``shapes`` are drawn.
    tech : extract.tech.Tech
    net_map : dict of str to str
        Layout net -> schematic net (:attr:`analyze.match.Match.net_map`).
    stages : list of StagePair
    notes : list of str
        Anything the matching wants said (:attr:`analyze.match.Match.notes`).
    """

    pre: object
    post: object
    tech: object
    net_map: dict[str, str]
    stages: list[StagePair]
    notes: list[str] = field(default_factory=list)


def _droop(r):
    return None if r is None or r.worst_case is None else r.worst_case.droop_v


def _vfinal(r):
    if r is None:
        return None
    if r.worst_case is not None:
        return r.worst_case.v_final
    return None


def compare_html(comparison: Comparison, *, max_shapes: int = MAX_SHAPES) -> str:
    """The HTML report of ``dynshare compare``: pre-layout against post-layout.

    Parameters
    ----------
    comparison : Comparison
    max_shapes : int
        As for :func:`check_html`.

    Returns
    -------
    str
        A complete HTML document: a stage table (v_final, margin and status
        before and after, droop increase = post droop − pre droop), bars of
        pre against post v_final per stage (threshold marked) and of the
        node capacitances per stage, the net table and the layout.

    Notes
    -----
    O(nets + shapes); no pattern is re-evaluated.
    """
    c = comparison
    post, pre, tech = c.post, c.pre, c.tech
    body = [f"<h1>Pre-layout against post-layout: cell {html.escape(post.cell)}</h1>",
            f"<p>Process {html.escape(tech.name)}, VDD {tech.vdd:g} V, guard {tech.guard:g} V. "
            f"Schematic <code>{html.escape(pre.source or '–')}</code>, layout "
            f"<code>{html.escape(post.source or '–')}</code>.</p>"]
    body += [f'<p class="note">{html.escape(n)}</p>' for n in c.notes]
    rows, bars = [], []
    for i, sp in enumerate(c.stages):
        d_pre, d_post = _droop(sp.pre), _droop(sp.post)
        inc = None if d_pre is None or d_post is None else f"{d_post - d_pre:+.3f} V"
        rows.append([f'<td><a href="#pair-{i}">{html.escape(sp.dynamic_node)}</a></td>',
                     c.net_map.get(sp.dynamic_node, "–"),
                     fmt_v(_vfinal(sp.pre)), fmt_v(_vfinal(sp.post)), inc,
                     "–" if sp.pre is None else f"{sp.pre.margin_v:+.3f} V",
                     "–" if sp.post is None else f"{sp.post.margin_v:+.3f} V",
                     status_html(None if sp.pre is None else sp.pre.status),
                     status_html(None if sp.post is None else sp.post.status)])
        bars.append({"label": sp.dynamic_node, "pre": _vfinal(sp.pre), "post": _vfinal(sp.post),
                     "mark": None if sp.post is None else sp.post.threshold_v})
    if rows:
        body.append(table(["dynamic node", "schematic name", "v_final pre", "v_final post", "droop increase",
                           "margin pre", "margin post", "status pre", "status post"], rows, cls="summary",
                          raw_cols=(0, 7, 8)))
        body.append("<figure>" + paired_bars_svg(bars, unit="V", axis_max=tech.vdd, pattern_id="v",
                                                 mark_text="receiver threshold (post-layout)")
                    + "<figcaption>Worst-case final voltage of each dynamic node.</figcaption></figure>")
    else:
        body.append('<p class="verdict">No dynamic stage to compare.</p>')
    for i, sp in enumerate(c.stages):
        body.append(_pair_section(i, sp, c))
    body.append("<h2>Nets</h2>")
    net_rows = []
    for name, net in post.nets.items():
        s_name = c.net_map.get(name)
        s_net = pre.nets.get(s_name) if s_name else None
        cp = None if s_net is None else s_net.cap_ff
        net_rows.append([name, s_name, cp, net.cap_ff, None if cp is None else net.cap_ff - cp])
    body.append(table(["layout net", "schematic net", "cap pre fF", "cap post fF", "post − pre fF"], net_rows,
                      cls="nets"))
    marks = [Mark(sp.dynamic_node, "dynamic", f"{sp.dynamic_node}: dynamic node") for sp in c.stages]
    body += ["<h2>Layout</h2>", layout_figure(post, tech, marks, [m.net for m in marks], max_shapes,
                                              "Colours show the post-layout capacitance.")]
    return page(f"dynshare compare: {post.cell}", "\n".join(body))


def _pair_section(i: int, sp: StagePair, c: Comparison) -> str:
    out = [f'<section class="stage" id="pair-{i}"><h2>Stage {html.escape(sp.dynamic_node)}</h2>']
    props = []
    for label, r in (("pre-layout", sp.pre), ("post-layout", sp.post)):
        if r is None:
            props.append([label, "no such stage", None, None, None, None, "<td>–</td>"])
            continue
        wc = r.worst_case
        props.append([label, "–" if wc is None else pattern_text(wc.inputs),
                      "–" if wc is None else " ".join(wc.shared_nodes) or "none",
                      fmt_v(None if wc is None else wc.v_final), fmt_v(r.threshold_v), f"{r.margin_v:+.3f} V",
                      status_html(r.status)])
    out.append(table(["", "worst pattern", "shared nodes", "v_final", "threshold", "margin", "status"], props,
                     raw_cols=(6,)))
    st = sp.post.stage if sp.post is not None else None
    nodes = [sp.dynamic_node] + ([] if st is None else list(st.internal_nodes))
    rows = []
    for name in nodes:
        s_name = c.net_map.get(name)
        s_net = c.pre.nets.get(s_name) if s_name else None
        p_net = c.post.nets.get(name)
        label = name if s_name in (None, name) else f"{name} ({s_name})"
        rows.append({"label": label, "pre": None if s_net is None else s_net.cap_ff,
                     "post": None if p_net is None else p_net.cap_ff})
    out.append("<figure>" + paired_bars_svg(rows, unit="fF", pattern_id=f"n{i}")
               + "<figcaption>Capacitance of the dynamic node and the internal nodes, layout name (schematic "
               "name).</figcaption></figure>")
    out.append("</section>")
    return "\n".join(out)
