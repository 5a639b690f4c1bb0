"""The HTML report of ``dynshare compare``: pre-layout against post-layout.

:func:`compare_html` draws an :class:`analyze.compare.comparison.Comparison`:
the stages analysed on the schematic and on the layout side by side, bars
of pre against post worst-case voltage per stage and of capacitance per
node, the droop increase each node's added capacitance causes, the fixes
on the layout, every net's capacitance before and after, and the layout
coloured by post-layout capacitance.  Self-contained and deterministic
like :func:`analyze.report.html_check.check_html`.
"""

from __future__ import annotations

import html

from analyze.report.html_page import (fix_action, flags_table, fmt_v, layout_figure, page, pattern_text, stage_kind, status_html,
                               table)
from analyze.report.json_report import input_name
from analyze.report.svg_layout import MAX_SHAPES, Mark
from analyze.report.svg_plots import paired_bars_svg

__all__ = ["compare_html"]


def _v_final(r):
    return None if r is None or r.worst_case is None else r.worst_case.v_final


def _droop_increase(sc):
    """``sc.droop_increase_v`` (post droop − pre droop), or None without both sides."""
    if hasattr(sc, "droop_increase_v"):
        return sc.droop_increase_v
    if sc.pre is None or sc.post is None:  # pragma: no cover - other stage-pair types
        return None
    d = [r.worst_case.droop_v if r.worst_case else 0.0 for r in (sc.pre, sc.post)]
    return d[1] - d[0]


def _margin(r) -> str:
    return "–" if r is None else f"{r.margin_v:+.3f} V"


def _summary(c) -> str:
    rows, bars = [], []
    for i, sc in enumerate(c.stages):
        inc = _droop_increase(sc)
        rows.append([f'<td><a href="#pair-{i}">{html.escape(sc.dynamic_node)}</a></td>',
                     c.net_map.get(sc.dynamic_node, "–"), fmt_v(_v_final(sc.pre)), fmt_v(_v_final(sc.post)),
                     None if inc is None else f"{inc:+.3f} V", _margin(sc.pre), _margin(sc.post),
                     status_html(None if sc.pre is None else sc.pre.status),
                     status_html(None if sc.post is None else sc.post.status)])
        bars.append({"label": sc.dynamic_node, "pre": _v_final(sc.pre), "post": _v_final(sc.post),
                     "mark": None if sc.post is None else sc.post.threshold_v})
    out = table(["dynamic node", "schematic name", "v_final pre", "v_final post", "droop increase", "margin pre",
                 "margin post", "status pre", "status post"], rows, cls="summary", raw_cols=(0, 7, 8))
    chart = paired_bars_svg(bars, unit="V", axis_max=c.tech.vdd, pattern_id="v",
                            mark_text="receiver threshold (post-layout)")
    return out + f"<figure>{chart}<figcaption>Worst-case final voltage of each dynamic node.</figcaption></figure>"


def _pair_section(i: int, sc, c) -> str:
    out = [f'<section class="stage" id="pair-{i}"><h2>Stage {html.escape(sc.dynamic_node)}</h2>']
    st = (sc.post or sc.pre).stage
    out.append(f"<p>{html.escape(stage_kind(st))}, clock {html.escape(st.clock)}.</p>")
    rows = []
    for label, r in (("pre-layout", sc.pre), ("post-layout", sc.post)):
        if r is None:
            rows.append([label, "no such stage", None, None, None, None, "<td>–</td>"])
            continue
        wc = r.worst_case
        rows.append([label, "–" if wc is None else pattern_text(wc.inputs),
                     "–" if wc is None else " ".join(wc.shared_nodes) or "none",
                     fmt_v(None if wc is None else wc.v_final), fmt_v(r.threshold_v), _margin(r),
                     status_html(r.status)])
    out.append(table(["", "worst pattern", "shared nodes", "v_final", "threshold", "margin", "status"], rows,
                     cls="pair", raw_cols=(6,)))
    nodes = [sc.dynamic_node] + ([] if sc.post is None else list(sc.post.stage.internal_nodes))
    bars = []
    for name in nodes:
        s_name = c.net_map.get(name)
        s_net = c.pre.nets.get(s_name) if s_name else None
        p_net = c.post.nets.get(name)
        label = name if s_name in (None, name) else f"{name} ({s_name})"
        bars.append({"label": label, "pre": None if s_net is None else s_net.cap_ff,
                     "post": None if p_net is None else p_net.cap_ff})
    out.append("<figure>" + paired_bars_svg(bars, unit="fF", pattern_id=f"n{i}")
               + "<figcaption>Capacitance of the dynamic node and the internal nodes, layout name (schematic "
               "name).</figcaption></figure>")
    attribution = getattr(sc, "attribution", None) or []
    if attribution:
        out.append("<h3>Where the droop increase comes from</h3>")
        out.append(table(["node", "schematic net", "added capacitance fF", "droop removed by reverting it V"],
                         [[a.node, a.schematic_name, a.delta_ff, a.droop_reduction_v] for a in attribution],
                         cls="attribution"))
        out.append('<p class="note">Each row re-runs the exact worst case with only that node set back to its '
                   "pre-layout capacitance; the rows need not add up, since charge sharing is not linear.</p>")
    if sc.post is not None:
        out.append(flags_table(sc.post))
    out.append("</section>")
    return "\n".join(out)


def _nets(c) -> str:
    deltas = getattr(c, "nets", None)
    rows = []
    if deltas is not None:
        for d in deltas:
            role = c.post.nets[d.name].role if d.name in c.post.nets else "–"
            rows.append([d.name, d.schematic_name, role, d.cap_ff_pre, d.cap_ff_post, d.cap_ff_post - d.cap_ff_pre,
                         ", ".join(p.replace("_", " ") for p in d.grew) or "–"])
    else:
        for name, net in c.post.nets.items():
            s_name = c.net_map.get(name)
            s_net = c.pre.nets.get(s_name) if s_name else None
            cp = None if s_net is None else s_net.cap_ff
            rows.append([name, s_name, net.role, cp, net.cap_ff, None if cp is None else net.cap_ff - cp, "–"])
    return table(["layout net", "schematic net", "role", "cap pre fF", "cap post fF", "post − pre fF",
                  "parts that grew"], rows, cls="nets")


def compare_html(comparison, *, max_shapes: int = MAX_SHAPES) -> str:
    """The HTML report of ``dynshare compare``.

    Parameters
    ----------
    comparison : analyze.compare.comparison.Comparison
        Used: ``pre`` and ``post`` (schematic and layout
        :class:`~extract.circuit.Circuit`), ``tech``, ``net_map`` (layout
        net -> schematic net), ``stages`` (each with ``dynamic_node``, the
        layout name, and ``pre`` / ``post``: an
        :class:`analyze.search.analysis.StageResult` or None; optionally
        ``attribution`` and ``droop_increase_v``), ``notes`` and ``nets``
        (:class:`analyze.compare.comparison.NetDelta` list; without it the net table
        is built from ``net_map``).
    max_shapes : int
        As for :func:`analyze.report.html_check.check_html`.

    Returns
    -------
    str
        A complete HTML document.

    Notes
    -----
    O(nets + shapes); no pattern is evaluated again.
    """
    c = comparison
    post, pre, tech = c.post, c.pre, c.tech
    body = [f"<h1>Pre-layout against post-layout: cell {html.escape(post.cell)}</h1>",
            f"<p>Process {html.escape(tech.name)}, VDD {tech.vdd:g} V, guard {tech.guard:g} V. "
            f"Schematic <code>{html.escape(input_name(pre.source) or '–')}</code>, layout "
            f"<code>{html.escape(input_name(post.source) or '–')}</code>.</p>"]
    body += [f'<p class="note">{html.escape(n)}</p>' for n in getattr(c, "notes", [])]
    if c.stages:
        failed = sum(sc.post is not None and sc.post.status == "fail" for sc in c.stages)
        n = len(c.stages)
        body.append(f'<p class="verdict">{"✓" if failed == 0 else "✗"} after layout {n - failed} of {n} '
                    f'stage{"s" if n != 1 else ""} pass.</p>')
        body.append(_summary(c))
    else:
        body.append('<p class="verdict">No dynamic stage to compare.</p>')
    body += [_pair_section(i, sc, c) for i, sc in enumerate(c.stages)]
    body += ["<h2>Nets</h2>", _nets(c)]
    marks = [Mark(sc.dynamic_node, "dynamic", f"{sc.dynamic_node}: dynamic node") for sc in c.stages]
    for sc in c.stages:
        if sc.post is not None:
            marks += [Mark(f.node, "flag", f"{f.node}: add {fix_action(sc.post.stage)}", f.location_um)
                      for f in sc.post.flags]
            if sc.post.worst_case is not None:
                marks += [Mark(n, "shared", "") for n in sc.post.worst_case.shared_nodes]
    body += ["<h2>Layout</h2>", layout_figure(post, tech, marks, [m.net for m in marks], max_shapes,
                                              "Colours show the post-layout capacitance.")]
    return page(f"dynshare compare: {post.cell}", "\n".join(body))
